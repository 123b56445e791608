"""audiobw: choose the narrowest passband that keeps a program's fidelity
while letting in the least noise.

The package is imported cheaply: the public names below (see
:mod:`audiobw.api`) and the submodules (with their numpy/scipy imports) load
only when first used.
"""

import sys as _sys

__version__ = "0.1.0"

_PUBLIC = (
    "Study",
    "Chain",
    "Grid",
    "Targets",
    "Meter",
    "Listening",
    "Program",
    "sweep",
    "render",
    "write_report",
    "run_batch",
    "SweepResult",
    "Case",
    "Choice",
)

__all__ = ["__version__", *_PUBLIC]


class _CallableModule(type(_sys)):
    """The class of the module :mod:`audiobw.sweep`, which shares its name with
    the public function :func:`audiobw.api.sweep`: calling the module sweeps."""

    def __call__(self, path, study=None, **kw):
        """Sweep one recording: see :func:`audiobw.api.sweep`."""
        from .api import sweep

        return sweep(path, study, **kw)


class _CallableRender(type(_sys)):
    """The class of the package :mod:`audiobw.render`, which shares its name with
    the public function :func:`audiobw.api.render`: calling the package renders."""

    def __call__(self, result, path, out_dir, listening=None, study=None):
        """Render the chosen case and the next-narrower one: see :func:`audiobw.api.render`."""
        from .api import render

        return render(result, path, out_dir, listening, study)


def __getattr__(name: str):
    if name in ("sweep", "render"):
        # the submodule audiobw.sweep (package audiobw.render) is callable and forwards
        # to api.sweep (api.render); importing it sets this attribute, so the two must be one object
        import importlib

        return importlib.import_module("." + name, __name__)
    if name in _PUBLIC:
        from . import api

        return getattr(api, name)
    raise AttributeError(f"module 'audiobw' has no attribute {name!r}")
