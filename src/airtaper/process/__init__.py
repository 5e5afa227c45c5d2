"""airtaper.process: ASM1 values shared by the model and the simulator (no equations of either).

* :mod:`~airtaper.process.asm1` - kinetic and stoichiometric parameter sets, overrides, temperature correction
* :mod:`~airtaper.process.stoichiometry` - the Petersen matrix and composition vectors (COD, N, TSS)
* :mod:`~airtaper.process.fractionation` - measured influent quantities to the 13 ASM1 components
"""
