"""The report of a finished output folder: the figures as PNG files, ``report.html`` and ``results.xlsx``.

One code path for ``airtaper optimize`` (after it has written its tables) and
``airtaper report DIR`` (later, without solving): both call :func:`write_report`,
which reads the folder (:func:`~airtaper.report.folder.read_study_folder`), draws the
figures (:mod:`airtaper.report.figures`) and writes each file atomically
(:mod:`airtaper.report.atomic`). The same folder always gives the same HTML.
"""

from __future__ import annotations

from pathlib import Path

from airtaper.report.atomic import write_bytes_atomic
from airtaper.report.figures import FIGURES, figure_png
from airtaper.report.folder import StudyFolder, read_study_folder
from airtaper.report.html import report_html
from airtaper.report.workbook import workbook_bytes

#: The PNG file of every figure (the same image the page inlines), for slides and memos.
FIGURE_FILES = {"airflow": "schedule.png", "train": "train.png", "do": "do_by_zone.png", "effluent": "effluent.png",
                "air_side": "power_and_pressure.png", "baseline": "baseline_by_zone.png", "blowers": "blower_runs.png"}
#: Files the report writes (a figure's PNG only when the folder has what it needs).
REPORT_NAMES = tuple(FIGURE_FILES.values()) + ("report.html", "results.xlsx")


def render(folder: StudyFolder, figures: bool = True) -> dict[str, bytes]:
    """The report's files as bytes, by name (no PNG when ``figures`` is false)."""
    images = {}
    if figures:
        for name, _caption, fn in FIGURES:
            fig = fn(folder)
            if fig is not None:
                images[name] = figure_png(fig)
    captions = {name: caption for name, caption, _fn in FIGURES}
    out = {FIGURE_FILES[name]: png for name, png in images.items()}
    out["results.xlsx"] = workbook_bytes(folder)
    data = {p.name for p in folder.path.iterdir()
            if p.is_file() and p.suffix in (".csv", ".json") and not p.name.startswith(".")}
    files = sorted(data | set(out) | {"report.html"})
    out["report.html"] = report_html(folder, images, captions, files).encode("utf-8")
    return out


def write_report(out_dir: str | Path, *, layout_path: str | Path | None = None, figures: bool = True) -> list[Path]:
    """Read the output folder ``out_dir`` and write its report files into it, each atomically."""
    folder = read_study_folder(out_dir, layout_path)
    files = render(folder, figures)
    written = [write_bytes_atomic(Path(out_dir) / name, data) for name, data in files.items()]
    for name in FIGURE_FILES.values():  # a figure this folder no longer has (say, blowers.csv removed)
        if name not in files:
            (Path(out_dir) / name).unlink(missing_ok=True)
    return written


__all__ = ["FIGURE_FILES", "REPORT_NAMES", "render", "write_report"]
