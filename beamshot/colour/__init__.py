"""Colour across the beam: linear camera RGB -> CIE XYZ -> chromaticity, CCT and Duv, per zone and as a map.

One concept per module:

- :mod:`.transform` - the stated camera RGB -> XYZ transform (sRGB/D65, the raw file's matrix, or a
  matrix fitted from a reference chart);
- :mod:`.white_balance` - what the photo's EXIF says about white balance, and what it means;
- :mod:`.chromaticity` - CIE 1931 x, y, CIE 1960 u, v and CIE 1976 u', v', with propagated covariance;
- :mod:`.cct` - CCT and Duv by Ohno (2013/2014), Robertson (1968) as a cross-check (colour-science,
  imported lazily);
- :mod:`.nominal` - the nominal CCT class of ANSI C78.377;
- :mod:`.chart` - a 3x3 matrix fitted from a reference-chart photo;
- :mod:`.channel_noise` - each channel's pixel noise against signal;
- :mod:`.beam_colour` - the stage: chromaticity per zone and over the (theta, phi) map, tint uniformity.

Nothing here imports colour-science at module import; only the CCT functions do, when called.
"""
