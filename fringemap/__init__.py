"""fringemap: calibrated film-thickness maps from photographs of interference colours.

The data flow one way through the subpackages::

    io (photo -> linear RGB) -> calibration -> matching (candidates)
    -> orders (one thickness per pixel) -> result -> stats -> report

with ``optics`` (film stacks, reflectance) and ``colour`` (spectra to camera
colours, the colour table) as the forward model every stage relies on.
"""

__version__ = "0.1.0"
