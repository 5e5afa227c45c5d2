"""Reading an input file as text: the shared reader's guards plus the UTF-8 check.

:func:`airtaper.layout.reader.read_input_file` is the one home of what an input file may be
(a regular file, not larger than a limit, read with a cap); this adds the decoding and turns
its refusal into the layout's one error form.
"""

from __future__ import annotations

import os

from airtaper.errors import InputError, Problem
from airtaper.layout.reader import UnreadableInput, read_input_file


def read_text_file(path, max_bytes: int, what: str, kind: str, encoding: str = "utf-8") -> tuple[str, str]:
    """(label, text) of an input file; unreadable, not a regular file, too large or not UTF-8 is an
    InputError naming the file.

    ``what`` names the file in "cannot read the <what>"; ``kind`` in "a UTF-8 <kind> file".
    """
    label = os.fspath(path)
    if not isinstance(label, str):
        label = os.fsdecode(label)
    try:
        raw = read_input_file(label, max_bytes, f"the {what}")
    except UnreadableInput as exc:
        raise InputError(Problem(label, "(file)", exc.problem, exc.got, exc.expected)) from None
    try:
        return label, raw.decode(encoding)
    except UnicodeDecodeError as exc:
        raise InputError(Problem(label, "(file)", "not UTF-8 text", f"byte {exc.start}", f"a UTF-8 {kind} file")) \
            from None
