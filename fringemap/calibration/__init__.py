"""Camera calibration: colour corrections from a chart, reference areas, or the photo itself.

A :class:`CameraModel` maps a photo's linear RGB into the colour table's
matching space (the recipe's light and sensor) and is stored as a TOML camera
file. Three ways to make one:

* :func:`calibrate_from_chart` — a photo of the standard 24-patch chart; the
  3×3 least-squares matrix (Cheung et al. 2004) or the degree-2
  root-polynomial correction (Finlayson, Mackiewicz & Hurlbert 2015,
  IEEE TIP 24(5):1460, doi:10.1109/TIP.2015.2405336), chosen by
  leave-one-out CIEDE2000;
* :func:`calibrate_from_reference` — per-channel gains from areas of known
  film thickness;
* :func:`self_calibrate` — per-channel gains (optionally a 3×3 matrix) fitted
  alternately with the measurement of the photo itself.

:func:`load_camera_model` reads a camera file, or returns
:data:`SELF_CALIBRATION` for the string ``"self"``.
"""

from .chart import ChartCalibration, calibrate_from_chart
from .chart_photo import ChartPhoto, render_chart_photo
from .methods import CORRECTION_METHODS, fit_correction
from .model import (
    SELF_CALIBRATION,
    CameraModel,
    SelfCalibrationRequest,
    load_camera_model,
    recipe_mismatches,
    save_camera_model,
)
from .reference import calibrate_from_reference
from .selfcal import (
    PreparedCamera,
    SelfCalibration,
    SelfCalibrationReport,
    camera_for_photo,
    self_calibrate,
)

__all__ = [
    "CameraModel",
    "load_camera_model",
    "save_camera_model",
    "calibrate_from_chart",
    "calibrate_from_reference",
    "self_calibrate",
    "render_chart_photo",
    "ChartPhoto",
    "ChartCalibration",
    "SelfCalibration",
    "SelfCalibrationReport",
    "SelfCalibrationRequest",
    "SELF_CALIBRATION",
    "CORRECTION_METHODS",
    "fit_correction",
    "recipe_mismatches",
    "camera_for_photo",
    "PreparedCamera",
]
