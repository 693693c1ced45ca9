"""beamshot: calibrated beam photometry from photos of a flashlight beam on a white wall.

Example (``analyze`` does what ``beamshot analyze`` does)::

    from beamshot import analyze
    report = analyze("beam.jpg", distance_m=5.0, lux_at_peak=412)
    report["peak_intensity"].text()   # e.g. '9,510 ± 480 cd'

``analyze`` and ``BeamshotError`` are loaded on first use (PEP 562 module ``__getattr__``), so
that ``import beamshot`` and ``beamshot --help`` do not pull in numpy, SciPy and OpenCV.
"""

__version__ = "0.1.0"

__all__ = ["analyze", "BeamshotError", "__version__"]

_LAZY = {"analyze": ".analysis", "BeamshotError": ".errors"}


def __getattr__(name):
    if name in _LAZY:
        import importlib

        value = getattr(importlib.import_module(_LAZY[name], __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(__all__))
