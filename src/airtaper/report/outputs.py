"""Output folders written as one set: a run's files appear complete, or not at all.

Every command that writes a folder opens it with :func:`output_folder` before any
work::

    with output_folder(args.out, inputs=files_read, overwrite=args.overwrite) as out:
        ...                                     # the work
        write_csv_atomic(out.file("a.csv"), frame)
        write_json_atomic(out.file("summary.json"), {**summary, **out.provenance()})

Opening checks at once that the folder can be written (exit 2 with the reason:
``--out`` names an existing file, a read-only folder, a folder that holds an
input of the run, or an earlier run's folder without ``--overwrite``) and makes
a hidden staging folder beside it, in the same parent so that the final move is
a rename within one file system. The files are written into the staging folder;
when the block ends normally the staging folder is renamed into place (an
earlier run's folder, with ``--overwrite``, is moved aside first and removed
after). When the block raises (bad input found late, a solver failure,
Ctrl-C, SIGTERM, which the CLI raises as an interrupt) the staging folder is
removed and the destination is untouched: a reader sees the old set or the new
set, never a mix.

The marker file :data:`MARKER` in each folder records the run's provenance
(airtaper's version and every input's path and SHA-256); ``--overwrite``
replaces only folders that carry it (or, from earlier versions, hold a
``summary.json`` and no subfolder), never a folder of someone else's files.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import signal
import stat
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import Iterable, Iterator

from airtaper import __version__
from airtaper.errors import InputError, Problem
from airtaper.report.atomic import current_umask

#: Hidden file in every output folder: what wrote it, from which inputs.
MARKER = ".airtaper-run.json"
_STAGING = ".airtaper-staging-"
_OLD = ".airtaper-old-"


def sha256_of(path: str | os.PathLike) -> str | None:
    """SHA-256 of a regular file's bytes, hex; None for anything else (a device, a pipe: the reader refuses it)."""
    try:
        if not stat.S_ISREG(os.stat(path).st_mode):
            return None
    except (OSError, ValueError):  # missing, unreadable, a NUL in the name: the reader reports it
        return None
    h = hashlib.sha256()
    try:
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 20), b""):
                h.update(block)
    except OSError:  # unreadable: the reader reports it
        return None
    return h.hexdigest()


def _refuse(out: Path, problem: str, got=None, expected: str | None = None) -> InputError:
    return InputError(Problem(str(out), "--out", problem, got, expected))


def _is_inside(path: Path, folder: Path) -> bool:
    return path == folder or folder in path.parents


def _earlier_run(folder: Path) -> bool:
    """Whether ``folder`` holds an airtaper run (the marker, or an older run's summary.json and only files)."""
    if (folder / MARKER).is_file():
        return True
    try:
        entries = list(folder.iterdir())
    except OSError:
        return False
    return (folder / "summary.json").is_file() and all(e.is_file() and not e.is_symlink() for e in entries)


class OutputFolder:
    """A run's output folder while it is written; see the module docstring."""

    def __init__(self, destination: Path, staging: Path, inputs: list[dict]):
        self.destination = destination
        self.staging = staging
        self.inputs = inputs
        self._open = True

    def file(self, name: str) -> Path:
        """Where to write the output ``name`` (inside the staging folder until the set is complete)."""
        if not name or "/" in name or "\\" in name or name in (".", "..", MARKER):
            raise ValueError(f"not an output file name: {name!r}")
        return self.staging / name

    def provenance(self) -> dict:
        """``{"airtaper_version": ..., "inputs": [{"path": ..., "sha256": ...}, ...]}`` for summary.json."""
        return {"airtaper_version": __version__, "inputs": [dict(i) for i in self.inputs]}

    def commit(self) -> Path:
        """Move the complete set into place (replacing an earlier run's folder as a whole); return it."""
        if not self._open:
            raise RuntimeError("output folder already closed")
        marker = self.staging / MARKER
        marker.write_text(json.dumps(self.provenance(), indent=2) + "\n", encoding="utf-8")
        _fsync_folder(self.staging)
        dest, old = self.destination, None
        blocked = _block_signals()
        try:
            if dest.exists():
                old = Path(tempfile.mkdtemp(prefix=f".{dest.name}{_OLD}", dir=dest.parent))
                os.rename(dest, old / dest.name)
            os.rename(self.staging, dest)
        except BaseException:
            if old is not None and (old / dest.name).exists() and not dest.exists():
                os.rename(old / dest.name, dest)  # put the earlier run back
            if old is not None:
                shutil.rmtree(old, ignore_errors=True)
            self.discard()
            raise
        finally:
            _unblock_signals(blocked)
        self._open = False
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
        _fsync_folder(dest.parent)
        return dest

    def discard(self) -> None:
        """Remove the staging folder; the destination is left as it was."""
        if self._open:
            shutil.rmtree(self.staging, ignore_errors=True)
            self._open = False


def prepare_output_folder(out: str | os.PathLike, *, inputs: Iterable[str | os.PathLike] = (),
                          overwrite: bool = False) -> OutputFolder:
    """Check that ``out`` can take this run's outputs and open its staging folder.

    Parameters
    ----------
    out : path
        The output folder the user named.
    inputs : paths
        Every file the run reads (layout, influent CSV, schedule...): a folder
        holding one is refused, and each is named with its SHA-256 in the
        provenance.
    overwrite : bool
        Replace an earlier run's folder as a whole (refused otherwise).

    Raises
    ------
    InputError
        At once, naming ``--out`` and the reason.
    """
    dest = Path(os.path.abspath(os.fspath(out)))
    shown = Path(os.fspath(out))
    if dest.exists() and not dest.is_dir():
        raise _refuse(shown, "names an existing file, not a folder", None, "a folder path (new, or an earlier run)")
    real = Path(os.path.realpath(dest))
    files = [Path(os.fspath(p)) for p in inputs]
    for p in files:
        if _is_inside(Path(os.path.realpath(p)), real):
            raise _refuse(shown, "the output folder holds an input of this run: writing the outputs would "
                                 "overwrite an input", str(p), "an output folder that holds no input")
    if dest.is_dir():
        if not os.access(dest, os.W_OK | os.X_OK):
            raise _refuse(shown, "the folder is not writable", None, "a folder you can write to")
        if any(dest.iterdir()):
            if not overwrite:
                raise _refuse(shown, "the folder holds an earlier run or other files (kept)", None,
                              "a new folder, or --overwrite to replace an earlier run")
            if not _earlier_run(dest):
                raise _refuse(shown, "the folder holds files that no airtaper run wrote; --overwrite replaces "
                                     "only an earlier run's folder", None, "a new folder")
    parent = dest.parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
        staging = Path(tempfile.mkdtemp(prefix=f".{dest.name}{_STAGING}", dir=parent))
    except OSError as exc:
        raise _refuse(shown, f"cannot write in {parent}: {exc.strerror or exc}", None,
                      "a folder you can write to") from None
    os.chmod(staging, 0o777 & ~current_umask())  # mkdtemp makes 0700; the output folder gets the usual permissions
    try:
        provenance = [{"path": str(p), "sha256": sha256_of(p)} for p in files]
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    return OutputFolder(dest, staging, provenance)


@contextmanager
def output_folder(out: str | os.PathLike, *, inputs: Iterable[str | os.PathLike] = (),
                  overwrite: bool = False) -> Iterator[OutputFolder]:
    """Open ``out`` (see :func:`prepare_output_folder`); commit the set if the block ends normally, else discard it."""
    folder = prepare_output_folder(out, inputs=inputs, overwrite=overwrite)
    try:
        yield folder
    except BaseException:
        folder.discard()
        raise
    folder.commit()


def _fsync_folder(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


_SIGNALS = {signal.SIGINT, signal.SIGTERM}


def _block_signals():
    """Hold SIGINT and SIGTERM during the two renames (delivered right after)."""
    try:
        return signal.pthread_sigmask(signal.SIG_BLOCK, _SIGNALS)
    except (AttributeError, OSError, ValueError):
        return None


def _unblock_signals(previous) -> None:
    if previous is not None:
        signal.pthread_sigmask(signal.SIG_SETMASK, previous)
