"""airtaper.layout: layout files (TOML + influent CSV) to validated, frozen dataclasses.

The input boundary: :func:`load_layout` reads and checks a file, reporting every
problem at once as one :class:`~airtaper.errors.InputError`;
:func:`graph.build_graph` gives the train as a networkx DiGraph;
:func:`layout_to_data` writes a Layout back as a dict in the file's own keys.
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
