"""audiobw: choose the narrowest passband that keeps a program's fidelity
while letting in the least noise.

The package is imported cheaply: submodules (and their numpy/scipy imports)
load only when used.
"""

__version__ = "0.1.0"

__all__ = ["__version__"]
