"""Reading an input file as text: one home for the size limit and the UTF-8 check.

(The layout parser reads its file the same way; when the input-contract work lands a shared
reader in :mod:`airtaper.layout.reader`, this becomes a call to it.)
"""

from __future__ import annotations

import os

from airtaper.errors import InputError, Problem


def read_text_file(path, max_bytes: int, what: str, kind: str, encoding: str = "utf-8") -> tuple[str, str]:
    """(label, text) of an input file; unreadable, too large or not UTF-8 is an InputError naming the file.

    ``what`` names the file in "cannot read the <what>"; ``kind`` in "a UTF-8 <kind> file".
    """
    label = os.fspath(path)
    if not isinstance(label, str):
        label = os.fsdecode(label)
    try:
        size = os.path.getsize(label)
        if size > max_bytes:
            raise InputError(Problem(label, "(file)", "file too large", f"{size} bytes", f"<= {max_bytes} bytes"))
        with open(label, "rb") as fh:
            raw = fh.read()
    except OSError as exc:
        raise InputError(Problem(label, "(file)", f"cannot read the {what}: {exc.strerror or exc}")) from None
    try:
        return label, raw.decode(encoding)
    except UnicodeDecodeError as exc:
        raise InputError(Problem(label, "(file)", "not UTF-8 text", f"byte {exc.start}", f"a UTF-8 {kind} file")) \
            from None
