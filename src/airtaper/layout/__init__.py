"""airtaper.layout: layout files (TOML + influent CSV) to validated, frozen dataclasses.

The input boundary: :func:`load_layout` reads and checks a file, reporting every
problem at once as one :class:`~airtaper.errors.InputError`;
:func:`graph.build_graph` gives the train as a networkx DiGraph;
:func:`layout_to_data` writes a Layout back as a dict in the file's own keys.
"""

from airtaper.layout.dump import layout_to_data
from airtaper.layout.parse import load_layout, parse_layout, parse_toml_text
from airtaper.layout.reader import LayoutWarning
from airtaper.layout.types import Layout

__all__ = ["Layout", "LayoutWarning", "load_layout", "parse_layout", "parse_toml_text", "layout_to_data"]
