"""beamshot: calibrated beam photometry from photos of a flashlight beam on a white wall.

>>> from beamshot import analyze  # doctest: +SKIP
>>> report = analyze("beam.jpg", distance_m=5.0, lux_at_peak=412)  # doctest: +SKIP
>>> report["peak_intensity"].value  # doctest: +SKIP
"""

__version__ = "0.1.0"

from .analysis import analyze  # noqa: E402
from .errors import BeamshotError  # noqa: E402

__all__ = ["analyze", "BeamshotError", "__version__"]
