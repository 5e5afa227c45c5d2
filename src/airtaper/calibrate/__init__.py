"""airtaper.calibrate: fit alpha x F per diffused zone (and mu_A, K_OH) to logged plant data.

Beside :mod:`airtaper.optimize` in the layer order: it builds on the layout, model,
solve and simulate layers. :func:`run_calibration` is the job of ``airtaper calibrate``.

* :mod:`~airtaper.calibrate.fit` - the whole job: data checks, the fit, statistics, override values
* :mod:`~airtaper.calibrate.horizon` - the layout on the record's own horizon
* :mod:`~airtaper.calibrate.problem` - the fit as one NLP on the cyclic train model
* :mod:`~airtaper.calibrate.statistics` - uncertainty and identifiability of the fitted parameters
* :mod:`~airtaper.calibrate.synthetic` - synthetic records from the simulator with known true values
"""

from airtaper.calibrate.fit import CalibrationOptions, CalibrationResult, run_calibration

__all__ = ["CalibrationOptions", "CalibrationResult", "run_calibration"]
