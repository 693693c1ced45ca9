"""beamshot: calibrated beam photometry from photos of a flashlight beam on a white wall.

Example (``analyze`` does what ``beamshot analyze`` does)::

    from beamshot import analyze
    report = analyze("beam.jpg", distance_m=5.0, lux_at_peak=412)
    report["peak_intensity"].text()   # e.g. '9,510 ± 480 cd'
"""

__version__ = "0.1.0"

from .analysis import analyze  # noqa: E402
from .errors import BeamshotError  # noqa: E402

__all__ = ["analyze", "BeamshotError", "__version__"]
