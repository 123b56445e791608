"""One exception root for audiobw, and the warnings it raises.

User mistakes (a bad option, a bad config key) raise :class:`ParameterError`;
data that cannot be used (an unreadable or unusable audio file) raises
:class:`AudioFileError`.  The CLI maps the first to exit status 2 and the
second to exit status 1, printing one line and no traceback.
"""

from __future__ import annotations


class AudiobwError(Exception):
    """Root of every error audiobw raises on purpose."""

    exit_code = 1


class ParameterError(AudiobwError, ValueError):
    """A value given by the user (option, config key, argument) is not accepted."""

    exit_code = 2


class ConfigError(ParameterError):
    """A chain/grid TOML file is malformed or holds an unknown key."""


class AudioFileError(AudiobwError, OSError):
    """An input audio file cannot be read or holds no usable program."""

    exit_code = 1


class OutputError(AudiobwError, OSError):
    """An output cannot be written (permissions, disk full, would overwrite an input)."""

    exit_code = 1


class AudiobwWarning(UserWarning):
    """Something recoverable that the user should know (clipping, DC offset, ...)."""


class NumericalWarning(AudiobwWarning):
    """A numerical result is less accurate than usual (ill-conditioned filter, ...)."""
