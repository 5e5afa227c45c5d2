"""airtaper.optimize: the diurnal aeration study built on the model, solve and simulate layers.

* :mod:`~airtaper.optimize.diurnal` - the whole study (:func:`run_optimization`)
* :mod:`~airtaper.optimize.results` - the study's tables from the solved model and its typed summary
* :mod:`~airtaper.optimize.problem` - decisions, limits and objective attached to the cyclic model
* :mod:`~airtaper.optimize.baseline` - the plant under uniform DO control, and the complying baseline
* :mod:`~airtaper.optimize.simday` - a day simulated by the independent simulator, reduced to what the study needs
* :mod:`~airtaper.optimize.compliance` - effluent and DO figures of a day and the limits they break
* :mod:`~airtaper.optimize.attempts` - start points and the retry ladder
* :mod:`~airtaper.optimize.gradient_scaling` - variable, row and objective scaling for Ipopt
* :mod:`~airtaper.optimize.elastic` - which limit cannot be met, where, when and by how much
* :mod:`~airtaper.optimize.verify` - the schedule re-simulated and checked against the limits
* :mod:`~airtaper.optimize.backoff` - DO back-off calibrated by re-simulation
* :mod:`~airtaper.optimize.staging`, :mod:`~airtaper.optimize.dispatch` - blower staging and swing zones
* :mod:`~airtaper.optimize.marginal` - marginal costs of the limits from the duals
* :mod:`~airtaper.optimize.prescreen` - limits that surely cannot be met, found without an optimisation
* :mod:`~airtaper.optimize.horizon` - a layout on another diurnal grid
* :mod:`~airtaper.optimize.progress` - the progress display
* :mod:`~airtaper.optimize.design` - diffuser-grid design over load days (``airtaper design``)
* :mod:`~airtaper.optimize.compare` - layouts side by side (``airtaper compare``)

docs/optimization.md gives the formulation, the start, the ladder and the verification rule.
"""
