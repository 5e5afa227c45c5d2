"""Many studies at once: scenario grids, their runs on Dask, the table of results, and the year.

* :mod:`airtaper.sweep.grid` - grid files: scenarios as layout values by key path, validated up front;
* :mod:`airtaper.sweep.journal` - the sweep folder: one row file per finished scenario (resume), the table;
* :mod:`airtaper.sweep.execute` - the runs on a Dask cluster (local by default, or an existing scheduler);
* :mod:`airtaper.sweep.year` - representative days weighted into a year, demand charges billed monthly.

The layer sits after ``report`` and before ``cli``: a scenario runs the ``optimize`` command's own code.
"""
