"""airtaper.physics: small pure functions of aeration physics.

One concern per module; every function evaluates floats, numpy arrays and Pyomo
expressions alike (see :mod:`airtaper.physics.backend`). Equations, sources,
units and the pinned conventions are listed in docs/physics.md.

* :mod:`~airtaper.physics.atmosphere` - barometric pressure from elevation
* :mod:`~airtaper.physics.saturation` - DO saturation (temperature, pressure, salinity)
* :mod:`~airtaper.physics.depth` - clean-water saturation at depth, C*inf20
* :mod:`~airtaper.physics.transfer` - SOTR, AOTR, field kLa and field saturation
* :mod:`~airtaper.physics.sote` - fitted clean-water SOTE curves
* :mod:`~airtaper.physics.pressure` - static head, diffuser and pipe losses, header pressure
* :mod:`~airtaper.physics.blower` - blower power, equivalent power curves of the machines, energy
* :mod:`~airtaper.physics.settling` - Takacs settling velocity, limiting solids flux
* :mod:`~airtaper.physics.smooth` - smooth max, min and step (for Ipopt)
* :mod:`~airtaper.physics.extrapolation` - warnings for curves used beyond their tested range
* :mod:`~airtaper.physics.backend` - exp, log, sqrt, power on floats, numpy and Pyomo alike
"""

from airtaper.physics import (
    atmosphere, backend, blower, depth, extrapolation, pressure, saturation, settling, smooth, sote, transfer,
)

__all__ = ["atmosphere", "backend", "blower", "depth", "extrapolation", "pressure", "saturation", "settling", "smooth",
           "sote", "transfer"]
