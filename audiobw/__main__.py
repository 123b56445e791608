"""``python -m audiobw`` runs the command line (as the console script does)."""

from ._start import entry

entry()
