"""airtaper.layout: layout files (TOML + influent CSV) to validated, frozen dataclasses.

The input boundary: :func:`load_layout` reads and checks a file, reporting every
problem at once as one :class:`~airtaper.errors.InputError`;
:func:`graph.build_graph` gives the train as a networkx DiGraph;
:func:`layout_to_data` writes a Layout back as a dict in the file's own keys.

* :mod:`~airtaper.layout.parse` - the layout TOML to a :class:`Layout`, every check, cross-section checks
* :mod:`~airtaper.layout.reader` - typed, path-aware reading of the TOML tree, collecting problems
* :mod:`~airtaper.layout.textfile` - reading an input file as text (size, kind, UTF-8)
* :mod:`~airtaper.layout.influent` - the ``[influent]`` section and its diurnal CSV
* :mod:`~airtaper.layout.loaddays` - the layout of one named load day (``[[load_days]]``)
* :mod:`~airtaper.layout.plantdata` - logged plant data (CSV) for calibration
* :mod:`~airtaper.layout.overrides` - override files applied to a layout's data before validation
* :mod:`~airtaper.layout.defaults` - every default with its source
* :mod:`~airtaper.layout.types` - the frozen dataclasses later layers rely on
* :mod:`~airtaper.layout.graph` - the train graph and its topology checks
* :mod:`~airtaper.layout.dump` - a Layout back to the file's keys
* :mod:`~airtaper.layout.bsm1` - the BSM1 benchmark plant built in code
"""

import os

from airtaper.layout.dump import layout_to_data
from airtaper.layout.influent import influent_csv_path
from airtaper.layout.loaddays import day_layout, layout_days
from airtaper.layout.parse import load_layout, parse_layout, parse_toml_text
from airtaper.layout.reader import LayoutWarning
from airtaper.layout.types import Layout


def layout_input_files(layout_path: str | os.PathLike, layout: Layout) -> list[str]:
    """The files a loaded layout was read from: the layout file and its influent CSV, if any."""
    files = [str(layout_path)]
    if layout.influent.source != "constant":
        files.append(influent_csv_path(layout_path, layout.influent.source))
    for day in layout.load_days:
        if day.influent is not None:
            path = influent_csv_path(layout_path, day.influent.source)
            if path not in files:
                files.append(path)
    return files


__all__ = ["Layout", "LayoutWarning", "day_layout", "layout_days", "layout_input_files", "load_layout", "parse_layout", "parse_toml_text",
           "layout_to_data"]
