"""report.html of the demo: self-contained, caution first, readable tables, plain words, findings highlighted;
rendered by headless Chromium (Debian's `chromium`) at 1280 px."""

from __future__ import annotations

import html
import json
import re
import shutil
import subprocess
from pathlib import Path

import pandas as pd
import pytest

from airtaper.report.build import render, write_report
from airtaper.report.folder import read_study_folder
from airtaper.report.text import CAUTION, fmt_margin

pytestmark = [pytest.mark.solver, pytest.mark.slow]

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")

#: Injected into a copy of the page only: records errors, then measures the page once it has loaded.
_PROBE = """<script>
window.__errors = [];
window.addEventListener('error', function (e) {
  window.__errors.push(String(e.message || (e.target && (e.target.src || e.target.href)) || 'error')); }, true);
var _ce = console.error;
console.error = function () { window.__errors.push(Array.prototype.join.call(arguments, ' ')); _ce.apply(console, arguments); };
window.addEventListener('load', function () {
  var imgs = Array.prototype.slice.call(document.images);
  var r = {images: imgs.length,
           loaded: imgs.filter(function (i) { return i.complete && i.naturalWidth > 0; }).length,
           scrollWidth: document.documentElement.scrollWidth, clientWidth: document.documentElement.clientWidth,
           errors: window.__errors};
  var pre = document.createElement('pre'); pre.id = 'airtaper-probe'; pre.textContent = JSON.stringify(r);
  document.body.appendChild(pre);
});
</script>"""


def _chromium(*args: str) -> subprocess.CompletedProcess:
    cmd = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars", "--no-first-run",
           "--virtual-time-budget=15000", *args]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=120)


@pytest.fixture(scope="module")
def page(demo_dir) -> str:
    return (demo_dir / "report.html").read_text(encoding="utf-8")


@pytest.mark.skipif(CHROMIUM is None, reason="Chromium is not installed (apt-get install chromium; .ci/run does it)")
def test_report_renders_in_headless_chromium_at_1280_px(demo_dir, tmp_path):
    text = (demo_dir / "report.html").read_text(encoding="utf-8")
    probed = tmp_path / "probed.html"
    probed.write_text(text.replace("<head>", "<head>" + _PROBE, 1), encoding="utf-8")
    dom = _chromium("--window-size=1280,900", "--dump-dom", probed.as_uri()).stdout
    m = re.search(r'<pre id="airtaper-probe">(.*?)</pre>', dom)
    assert m, "the page did not finish loading in Chromium"
    probe = json.loads(m.group(1).replace("&quot;", '"').replace("&amp;", "&"))
    assert probe["images"] >= 6 and probe["loaded"] == probe["images"]
    assert probe["errors"] == []
    assert probe["scrollWidth"] <= probe["clientWidth"] <= 1280  # no horizontal scrolling
    # the print layout (its @media print rules applied on screen) fits landscape A4's printable width, about 1030 px
    printed = tmp_path / "printed.html"
    printed.write_text(text.replace("@media print", "@media all").replace("<head>", "<head>" + _PROBE, 1),
                       encoding="utf-8")
    dom = _chromium("--window-size=1030,900", "--dump-dom", printed.as_uri()).stdout
    probe = json.loads(re.search(r'<pre id="airtaper-probe">(.*?)</pre>', dom).group(1).replace("&quot;", '"'))
    assert probe["scrollWidth"] <= probe["clientWidth"] and probe["errors"] == []
    # the unmodified page logs nothing to the browser console (Chromium's log of it on stderr)
    log = _chromium("--window-size=1280,900", "--enable-logging=stderr", "--v=0", "--dump-dom",
                    (demo_dir / "report.html").as_uri()).stderr
    assert [line for line in log.splitlines() if ":CONSOLE" in line] == []
    # a screenshot of the unmodified page that is not blank
    shot = tmp_path / "shot.png"
    _chromium("--window-size=1280,2400", f"--screenshot={shot}", (demo_dir / "report.html").as_uri())
    from PIL import Image

    im = Image.open(shot).convert("L")
    assert im.size == (1280, 2400)
    hist = im.histogram()
    assert sum(hist[:128]) > 0.01 * im.size[0] * im.size[1]  # dark text and lines cover more than 1 %
    assert len([h for h in hist if h]) > 50  # many grey levels: figures, not a flat page


def test_page_is_self_contained(page):
    assert "<script" not in page.lower() and "<link" not in page.lower()
    assert not re.search(r"""(src|href)\s*=\s*['"]?(https?:|//)""", page)
    assert "url(" not in page
    imgs = re.findall(r"<img [^>]*src='([^']*)'", page)
    assert len(imgs) >= 6 and all(s.startswith("data:image/png;base64,") for s in imgs)


def test_caution_comes_first_then_findings_headline_inputs_results(page):
    body = page[page.index("<body>"):]
    assert body.index(CAUTION) < body.index("<h1>")
    order = [body.index(h) for h in ("<h2>Result</h2>", "<h2>Inputs</h2>", "<h2>Schedule</h2>",
                                     "<h2>Verification by the independent simulator</h2>", "<h2>Marginal costs</h2>",
                                     "<h2>Solver</h2>")]
    assert order == sorted(order)
    assert "class='findings'" not in page  # a verified demo run has nothing to highlight


def test_schedule_table_zones_by_hours_with_units(page, demo_dir):
    sched = pd.read_csv(demo_dir / "schedule.csv")
    table = page[page.index("<caption>Airflow by zone, Sm3/h"):]
    table = table[:table.index("</table>")]
    heads = re.findall(r"<th>([^<]*)</th>", table)
    assert heads == [f"{h:02d}" for h in range(24)]
    rows = re.findall(r"<tr><td class='zone'>([^<]*)</td>", table)
    assert rows == list(dict.fromkeys(sched["zone"]))  # no empty row, flow order
    first = sched[sched["zone"] == "Z2"].sort_values("period_start_h")["airflow_Sm3_h"].iloc[0]
    assert f"<td>{first:,.0f}</td>" in table
    assert "0.0</th>" not in page and "23.0</th>" not in page


def test_marginal_costs_in_plain_words(page, demo_dir):
    summary = json.loads((demo_dir / "summary.json").read_text())
    z2 = next(i for i in summary["marginal_costs"] if i["limit"] == "do_min_mg_L" and i["where"] == "Z2")
    assert html.escape(f"Raising Z2's DO minimum (now 1 mg/L) by 0.1 mg/L costs {z2['kWh_per_day']:,.1f} kWh/d "
                       f"({z2['cost_per_day']:,.2f} EUR/d).") in page
    assert "nh4_mean_mg_L" not in page and "do_min_mg_L" not in page  # no internal keys
    assert "<ul class='plain'></ul>" not in page and "<ul></ul>" not in page


def test_negative_do_margins_are_shown_as_such(page, demo_dir):
    ver = json.loads((demo_dir / "summary.json").read_text())["verification"]
    for zone, m in ver["do_margin_mg_L"].items():
        assert f"<td>{fmt_margin(m)}</td>" in page
        if m < -5e-4:
            assert fmt_margin(m).startswith("-") and fmt_margin(m) != "-0.000"
    assert fmt_margin(-9.9e-9) == "-9.9e-09" and fmt_margin(0.0) == "+0.000"


def test_an_infeasible_run_is_highlighted_and_gives_no_saving(demo_copy):
    s = json.loads((demo_copy / "summary.json").read_text())
    s["status"] = "infeasible"
    s["infeasibility"] = [{"limit": "do_min", "zone": "Z2", "start_h": 10.0, "end_h": 14.0, "amount": 0.4,
                           "unit": "mg/L", "message": "zone Z2 cannot hold its DO minimum of 1 mg/L: short by up to "
                                                      "0.40 mg/L, 10:00-14:00"}]
    s["verification"]["violations"] = ["zone Z3: DO leaves its range (1..- mg/L) by 0.120 mg/L"]
    s["verification"]["do_margin_mg_L"]["Z3"] = -0.12
    s["verification"]["verified"] = False
    (demo_copy / "summary.json").write_text(json.dumps(s))
    page = render(read_study_folder(demo_copy), figures=False)["report.html"].decode()
    box = page[page.index("class='findings'"):page.index("<h2>Result</h2>")]
    assert "Status: infeasible" in box and "short by up to 0.40 mg/L, 10:00-14:00" in box
    assert "zone Z3: DO leaves its range" in box
    assert "energy saving against the baseline" not in page
    assert "falls below its minimum by 0.120 mg/L: breaks the rule" in page  # Z3 has a minimum only


def test_optional_inputs_absent_are_left_out_without_error(demo_copy, tmp_path):
    s = json.loads((demo_copy / "summary.json").read_text())
    s["layout"] = str(tmp_path / "moved-away.toml")
    (demo_copy / "summary.json").write_text(json.dumps(s))
    for name in ("header.csv", "timeseries.csv", "blowers.csv"):
        (demo_copy / name).unlink(missing_ok=True)
    sched = pd.read_csv(demo_copy / "schedule.csv")
    sched.drop(columns=[c for c in sched if c.startswith("baseline_")]).to_csv(demo_copy / "schedule.csv", index=False)
    paths = write_report(demo_copy)
    page = (demo_copy / "report.html").read_text()
    assert "moved-away.toml named in summary.json was not found" in page
    assert "Baseline airflow" not in page and "Air side by hour" not in page
    assert {p.name for p in paths} == {"schedule.png", "do_by_zone.png", "report.html", "results.xlsx"}
    assert not (demo_copy / "train.png").exists() and not (demo_copy / "effluent.png").exists()  # stale ones go
    # given again with --layout's path, the inputs come back
    write_report(demo_copy, layout_path=Path(__file__).resolve().parents[2] / "layouts" / "demo.toml", figures=False)
    assert "<h3>Train</h3>" in (demo_copy / "report.html").read_text()


def test_blowers_csv_when_present_adds_the_run_chart_and_table(demo_copy):
    head = pd.read_csv(demo_copy / "header.csv")
    rows = [dict(period_start_h=float(i), period_end_h=float(i + 1), blower=b, running=(b == "B3" or i % 2 == 0),
                 airflow_Sm3_h=1000.0, power_kW=20.0, efficiency=0.7, discharge_gauge_kPa=56.0,
                 starts=int(b == "B1" and i % 2 == 0)) for i in range(len(head)) for b in ("B1", "B3")]
    pd.DataFrame(rows).to_csv(demo_copy / "blowers.csv", index=False)
    s = json.loads((demo_copy / "summary.json").read_text())
    s["dispatch"] = {"energy_cost": 300.0, "demand_charge": 40.5, "start_costs": 12.0, "cost_per_day": 352.5,
                     "rounds": [{"round": 1}, {"round": 2}], "stopped": "the dispatch repeats",
                     "blowers": {"B1": {"running_h": 12.0, "starts": 12, "out_of_service": False},
                                 "B2": {"running_h": 0.0, "starts": 0, "out_of_service": True}},
                     "swing_zones": {"Z6": {"aerated_periods": [1, 2, 3], "switches": 2}},
                     "feasibility_breaches": ["B3 runs below its minimum airflow at 03:00"]}
    (demo_copy / "summary.json").write_text(json.dumps(s))
    page = render(read_study_folder(demo_copy))["report.html"].decode()
    assert "energy 300.00 + demand charge 40.50 + starts 12.00 = 352.50 EUR/d" in page
    assert "Out of service: B2." in page and "Z6: aerated in 3 of 24 periods, 2 switches per day" in page
    assert "<td>2 (the dispatch repeats)</td>" in page
    box = page[page.index("class='findings'"):page.index("<h2>Result</h2>")]
    assert "Blowers or grids: B3 runs below its minimum airflow at 03:00" in box
    assert "<h3>Blowers over the day</h3>" in page and "Blower run chart." in page
    table = page[page.index("<h3>Blowers over the day</h3>"):]
    assert "<td class='left'>B1</td><td>12.0</td><td>480</td><td>12</td>" in table


def test_figures_added_to_the_summary_later_are_listed(demo_copy):
    s = json.loads((demo_copy / "summary.json").read_text())
    s["bill"] = {"energy_cost": 350.25, "demand_charge": 40.0}
    s["version"] = "9.9"
    (demo_copy / "summary.json").write_text(json.dumps(s))
    page = render(read_study_folder(demo_copy), figures=False)["report.html"].decode()
    further = page[page.index("<h2>Further figures</h2>"):]
    assert "<th>bill: energy_cost</th><td>350.250</td>" in further and "<th>version</th><td>9.9</td>" in further
