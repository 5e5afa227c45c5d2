"""airtaper.report: the output files, written atomically, and the report built from a finished folder.

* :mod:`~airtaper.report.atomic` - atomic file writing (temporary file, fsync, rename)
* :mod:`~airtaper.report.outputs` - an output folder written as one set, with the run's provenance
* :mod:`~airtaper.report.study_files` - an aeration study's CSV tables and summary.json, and its console summary
* :mod:`~airtaper.report.folder` - a finished folder read back and checked: the report's one input
* :mod:`~airtaper.report.build` - figures, ``report.html`` and ``results.xlsx`` from a folder
* :mod:`~airtaper.report.figures` - the figures (matplotlib)
* :mod:`~airtaper.report.html` - ``report.html``
* :mod:`~airtaper.report.workbook` - ``results.xlsx`` (openpyxl)
* :mod:`~airtaper.report.columns` - units of the output columns, for headings
* :mod:`~airtaper.report.text` - the caution, number formats, marginal costs in words
* :mod:`~airtaper.report.calibration` - the outputs of ``airtaper calibrate``
* :mod:`~airtaper.report.design` - the outputs of ``airtaper design`` and ``airtaper compare``
* :mod:`~airtaper.report.sweep` - the report of a sweep or a year

docs/outputs.md lists every file, column and summary key.
"""
