"""airtaper.cli: the `airtaper` command, one module per subcommand.

* :mod:`~airtaper.cli.main` - argument parsing, the subcommand list, errors and warnings to one-line messages
* :mod:`~airtaper.cli.check` - ``airtaper check``: validate a layout, print its train and the pre-screen
* :mod:`~airtaper.cli.simulate` - ``airtaper simulate``: the periodic day by the independent simulator
* :mod:`~airtaper.cli.optimize` - ``airtaper optimize``: the diurnal schedule, verified, with its report
* :mod:`~airtaper.cli.report` - ``airtaper report``: rebuild the report of a finished output folder
* :mod:`~airtaper.cli.calibrate` - ``airtaper calibrate``: alpha x F (and mu_A, K_OH) fitted to plant data
* :mod:`~airtaper.cli.design` - ``airtaper design``: the diffuser count of every zone over the load days
* :mod:`~airtaper.cli.compare` - ``airtaper compare``: layouts optimised over their load days, side by side
* :mod:`~airtaper.cli.sweep` - ``airtaper sweep``: many ``optimize`` runs from a grid file, on Dask
* :mod:`~airtaper.cli.year` - ``airtaper year``: a year of operation from representative days
"""
