"""The figures' fixed layout (margins from the labels' estimated sizes, no layout engine) keeps every label inside
the figure and off the other panels, for short and long zone names and a peak at the end of the day."""

from __future__ import annotations

import pytest

from airtaper.report import figures as F
from airtaper.report.folder import read_study_folder
from airtaper.report.study_files import write_study_outputs

from .test_study_files import _tables


def _folder(path, zones, n_periods, power_scale=1.0):
    schedule, header, ts, summary = _tables(n_periods=n_periods, zones=zones)
    for frame in (schedule, header):
        frame["period_start_h"] *= 4 / n_periods
        frame["period_end_h"] *= 4 / n_periods
    header["power_kW"] *= power_scale  # rising all day: the peak is in the last period
    write_study_outputs(path, schedule=schedule, header=header, timeseries=ts, summary=summary, figure=False)
    return read_study_folder(path)


CASES = {"short names": (("Z2", "Z3"), 4, 1.0),
         "long names, many zones": (("north_aerobic_1", "north_aerobic_2", "south_aerobic_long_name", "Z5"), 24, 1e3)}


@pytest.mark.parametrize("case", sorted(CASES))
@pytest.mark.parametrize("name", ["airflow_figure", "do_figure", "effluent_figure", "air_side_figure"])
def test_every_label_lies_inside_the_figure_and_off_the_other_panels(tmp_path, case, name):
    fig = getattr(F, name)(_folder(tmp_path, *CASES[case]))
    assert fig.get_layout_engine() is None
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    box = fig.bbox
    ticks, tick_labels = [], set()
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            lo, hi = sorted(axis.get_view_interval())
            for tick, loc in zip(axis.get_major_ticks(), axis.get_majorticklocs()):
                tick_labels |= {id(tick.label1), id(tick.label2)}
                if lo - 1e-9 * (hi - lo) <= loc <= hi + 1e-9 * (hi - lo):  # drawn: in the view
                    ticks += [(t, ax) for t in (tick.label1, tick.label2) if t.get_visible() and t.get_text()]
    texts = [t for t in fig.findobj(lambda a: hasattr(a, "get_text") and a.get_visible() and a.get_text())
             if id(t) not in tick_labels and (t.axes is None or t.axes.get_visible())]
    for text in texts + [t for t, _ax in ticks]:
        e = text.get_window_extent(renderer)
        assert box.x0 - 1 <= e.x0 and e.x1 <= box.x1 + 1 and box.y0 - 1 <= e.y0 and e.y1 <= box.y1 + 1, \
            (text.get_text(), e, box)
    panels = [ax for ax in fig.axes if ax.get_visible()]
    for text, owner in ticks + [(a.xaxis.label, a) for a in panels] + [(a.yaxis.label, a) for a in panels]:
        if not text.get_text():
            continue
        e = text.get_window_extent(renderer)
        for other in panels:  # every label stays clear of every other panel's plot area
            if other is owner or other.bbox.bounds == owner.bbox.bounds:  # (a twin shares its panel)
                continue
            o = other.bbox
            overlap = min(e.x1, o.x1) - max(e.x0, o.x0), min(e.y1, o.y1) - max(e.y0, o.y0)
            assert not (overlap[0] > 1 and overlap[1] > 1), (text.get_text(), other.get_ylabel())
