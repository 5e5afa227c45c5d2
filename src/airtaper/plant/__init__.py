"""airtaper.plant: the resolved plant, made once from a layout, that every later layer computes with.

* :mod:`~airtaper.plant.resolve` - the one resolution step (:func:`resolve_plant`, :func:`load_plant`): every
  check that needs more than the parser, reported in the layout's error form; a design's grid variant
  (:func:`with_diffuser_counts`)
* :mod:`~airtaper.plant.resolved` - the frozen result (:class:`ResolvedPlant`): pressures, hydraulics, ASM1
  parameters and influent components per period, per zone its aeration (SOTE and headloss curves,
  saturation, airflow range, the kLa rule), the air side with its power chain and the day's cost
"""

from airtaper.plant.resolve import load_plant, resolve_plant, with_diffuser_counts
from airtaper.plant.resolved import AirSide, DiffusedZone, FixedKla, Hydraulics, ResolvedPlant

__all__ = ["AirSide", "DiffusedZone", "FixedKla", "Hydraulics", "ResolvedPlant", "load_plant", "resolve_plant",
           "with_diffuser_counts"]
