"""airtaper.calibrate: fit alpha x F per diffused zone (and mu_A, K_OH) to logged plant data.

Beside :mod:`airtaper.optimize` in the layer order: it builds on the layout, model,
solve and simulate layers. :func:`run_calibration` is the job of ``airtaper calibrate``;
:mod:`airtaper.calibrate.synthetic` makes synthetic records with known true values.
"""

from airtaper.calibrate.fit import CalibrationOptions, CalibrationResult, run_calibration

__all__ = ["CalibrationOptions", "CalibrationResult", "run_calibration"]
