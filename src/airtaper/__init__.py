"""airtaper: tapered-aeration schedules for activated-sludge trains.

Layers, in the direction data flows:

    layout   -> validated, frozen dataclasses and the train graph (the input boundary)
    physics  -> small pure functions: saturation, oxygen transfer, pressures, blower power
    process  -> ASM1 parameter sets, stoichiometry and influent fractionation (values only)
    plant    -> the resolved plant: made once from a layout, what every later layer computes with
    model    -> Pyomo models of the train (steady state and cyclic diurnal)
    solve    -> the Pyomo -> CasADi -> cyipopt bridge, and HiGHS for LP/MILP
    simulate -> an independent numpy/scipy simulator of the same plant
    optimize -> the diurnal aeration study built on model, solve and simulate; design and compare
    report   -> CSV, JSON, PNG and HTML outputs, written atomically
    sweep    -> many studies at once on Dask (scenario grids, the year)
    cli      -> the `airtaper` command

Results are planning estimates; local codes, permits and licensed engineers decide.
"""

__version__ = "0.1.0"
