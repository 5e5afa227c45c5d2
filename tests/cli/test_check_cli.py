"""`airtaper check`: the train table on a good layout, error lines and exit 2 on a bad one, never a traceback."""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from airtaper import __version__
from airtaper.cli import check as check_cmd
from airtaper.cli.main import main
from airtaper.errors import EXIT_FAILURE, EXIT_INPUT, EXIT_OK

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "layouts" / "demo.toml"
THREE = ROOT / "layouts" / "three_tank.toml"


@pytest.fixture
def bad_layout(tmp_path):
    """The demo with three mistakes: a negative volume, a typo'd key, a recycle to nowhere."""
    text = DEMO.read_text()
    text = text.replace('id = "Z3"\nkind = "aerated"\nvolume_m3 = 900.0', 'id = "Z3"\nkind = "aerated"\nvolume_m3 = -900.0')
    text = text.replace("valve_capacity_Sm3_h = 4000.0", "valve_capacity_Sm3h = 4000.0")
    text = text.replace('from_zone = "Z6"\nto_zone = "Z1"', 'from_zone = "Z6"\nto_zone = "Z0"')
    path = tmp_path / "bad.toml"
    path.write_text(text)
    shutil.copy(ROOT / "layouts" / "demo_influent.csv", tmp_path / "demo_influent.csv")
    return path


def test_check_demo_prints_the_train(capsys):
    assert main(["check", str(DEMO)]) == EXIT_OK
    out, err = capsys.readouterr()
    assert err == ""
    lines = out.splitlines()
    assert lines[0] == f"Brackenford town works, train 1 ({DEMO})"
    header = next(line for line in lines if line.startswith("zone"))
    for column in ("zone", "kind", "volume m3", "HRT h", "diffusers", "density %", "airflow Sm3/h"):
        assert column in header
    rows = {line.split()[0]: line.split() for line in lines if re.match(r"^(Z\d|total)\s", line)}
    assert rows["Z1"][:5] == ["Z1", "anoxic", "1,100", "2.20", "-"]
    assert rows["Z2"] == ["Z2", "aerated", "900", "1.80", "800", "x", "disc_040", "19.6", "800-5,600"]
    assert rows["Z6"] == ["Z6", "aerated", "900", "1.80", "380", "x", "disc_040", "9.3", "380-2,660"]
    assert rows["total"] == ["total", "5,600", "11.20", "2,880", "2,880-20,160"]
    assert "recycle IR Z6 -> Z1 2.5 x Q" in out and "objective: cost" in out
    assert "load days (365 days in all):" in lines
    assert "  peak 1 d: flow x 1.3, load x 1.5, alpha x 0.9" in lines
    assert "  winter 90 d: flow x 1, load x 1, water 12 C" in lines
    assert "  minimum 1 d: flow x 0.7, load x 0.6, Z6 DO max 3.5 mg/L" in lines  # the day's own DO range
    assert "capital: 90 EUR per diffuser, 15000 EUR per zone, 5 % over 15 years" in lines


def test_check_three_tank(capsys):
    assert main(["check", str(THREE)]) == EXIT_OK
    out, _ = capsys.readouterr()
    assert "T3     aerated        500   4.00  260 x disc_030        7.0      260-1,430" in out
    assert "objective: energy" in out


def test_check_bad_layout_lists_every_problem(bad_layout, capsys):
    assert main(["check", str(bad_layout)]) == EXIT_INPUT
    out, err = capsys.readouterr()
    assert out == ""
    assert err.splitlines() == [
        f"error: {bad_layout}: zones.Z3.volume_m3: must be positive (got -900.0, expected > 0)",
        f"error: {bad_layout}: zones.Z4.valve_capacity_Sm3h: unknown key, did you mean 'valve_capacity_Sm3_h'?",
        f"error: {bad_layout}: flows.recycles.IR.to_zone: recycle to or from no zone (got 'Z0', expected one of "
        "Z1, Z2, Z3, Z4, Z5, Z6)",
    ]


def test_warnings_go_to_stderr_and_exit_zero(tmp_path, capsys):
    text = THREE.read_text().replace("volume_m3 = 500.0\ndepth_m = 4.5\ngrid = { type = \"disc_030\", count = 260",
                                     "volume_m3 = 500.0\ndepth_m = 4.5\narea_m2 = 130.0\n"
                                     "grid = { type = \"disc_030\", count = 260")
    path = tmp_path / "warn.toml"
    path.write_text(text)
    assert main(["check", str(path)]) == EXIT_OK
    out, err = capsys.readouterr()
    assert err.splitlines() == [f"warning: {path}: zones.T3.area_m2: floor area 130 m2 differs from "
                                "volume_m3 / depth_m = 111.1 m2 by more than 15 %"]
    assert "T3" in out


def test_missing_file(tmp_path, capsys):
    missing = tmp_path / "nope.toml"
    assert main(["check", str(missing)]) == EXIT_INPUT
    assert capsys.readouterr().err == f"error: {missing}: (file): cannot read the layout: No such file or directory\n"


def test_version(capsys):
    assert main(["--version"]) == EXIT_OK
    assert capsys.readouterr().out.strip() == f"airtaper {__version__}"


def test_no_command_and_usage_errors_exit_2(capsys):
    assert main([]) == EXIT_INPUT
    assert main(["check"]) == EXIT_INPUT  # argparse: the LAYOUT argument is required
    assert main(["frobnicate"]) == EXIT_INPUT
    assert "Traceback" not in capsys.readouterr().err


def test_internal_failure_is_reported_without_traceback(monkeypatch, capsys):
    def boom(*args, **kwargs):
        raise RuntimeError("simulated")
    monkeypatch.setattr(check_cmd, "load_plant", boom)
    monkeypatch.delenv("AIRTAPER_DEBUG", raising=False)
    assert main(["check", str(DEMO)]) == EXIT_FAILURE
    err = capsys.readouterr().err
    assert err.startswith("error: internal failure: RuntimeError: simulated") and "Traceback" not in err


def test_python_dash_m_on_a_bad_layout(bad_layout):
    proc = subprocess.run([sys.executable, "-m", "airtaper", "check", str(bad_layout)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == EXIT_INPUT
    assert proc.stdout == ""
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.splitlines()
    assert len(lines) == 3 and all(line.startswith("error: ") for line in lines)


def test_python_dash_m_on_the_demo():
    proc = subprocess.run([sys.executable, "-m", "airtaper", "check", str(DEMO)], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == EXIT_OK, proc.stderr
    assert "2,880-20,160" in proc.stdout


def test_a_warning_naming_the_cause_is_printed_before_the_errors(tmp_path, capsys):
    # a depth typed in mm: the density error follows from it, the warning says why
    text = DEMO.read_text().replace('id = "Z2"\nkind = "aerated"\nvolume_m3 = 900.0\ndepth_m = 5.5',
                                    'id = "Z2"\nkind = "aerated"\nvolume_m3 = 900.0\ndepth_m = 5500')
    path = tmp_path / "mm.toml"
    path.write_text(text)
    shutil.copy(ROOT / "layouts" / "demo_influent.csv", tmp_path / "demo_influent.csv")
    assert main(["check", str(path)]) == EXIT_INPUT
    assert capsys.readouterr().err.splitlines() == [
        f"warning: {path}: zones.Z2.grid.submergence_m: grid sits 5494.80 m above the floor",
        f"warning: {path}: zones.Z2.depth_m: side-water depth 5500 m: was it typed in mm (5.5 m)?",
        f"error: {path}: zones.Z2.grid.count: diffusers cover 19555.6 % of the floor, more than fits (got 800, "
        "expected <= 1 (25 % of 0.2 m2))",
    ]


def test_a_closed_stdout_ends_quietly():
    # `airtaper check ... | head`: the reader leaves before airtaper writes
    proc = subprocess.Popen([sys.executable, "-m", "airtaper", "check", str(DEMO)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)
    proc.stdout.close()
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=120) == EXIT_OK
    assert err == ""


def test_sigterm_is_reported_like_an_interrupt(monkeypatch, capsys):
    import os
    import signal

    def terminated(*args, **kwargs):
        os.kill(os.getpid(), signal.SIGTERM)
        raise AssertionError("SIGTERM did not stop the command")
    monkeypatch.setattr(check_cmd, "load_plant", terminated)
    assert main(["check", str(DEMO)]) == 128 + signal.SIGTERM
    assert capsys.readouterr().err == "error: terminated\n"
    assert signal.getsignal(signal.SIGTERM) is signal.SIG_DFL  # restored after the command


# --- check rejects every layout a computing command rejects for its input ----------------------------------------
_HEADLOSS_ONE_POINT = "headloss_points = [\n  { airflow_per_diffuser_Sm3_h = 1.0, headloss_kPa = 2.9 },\n]\n"
_SOTE_THREE_POINTS = """sote_points = [
  { airflow_per_diffuser_Sm3_h = 1.0, sote_percent = 30.0, density_percent = 8.0, submergence_m = 4.0 },
  { airflow_per_diffuser_Sm3_h = 3.0, sote_percent = 28.0, density_percent = 12.0, submergence_m = 5.0 },
  { airflow_per_diffuser_Sm3_h = 5.0, sote_percent = 27.0, density_percent = 20.0, submergence_m = 6.0 },
]
"""


def _between(text: str, start: str, end: str, new: str) -> str:
    a = text.index(start)
    return text[:a] + new + text[text.index(end, a):]


#: Layouts each broken in one way, the parser's and the resolution's checks (the SOTE and headloss fits, the
#: TKN fractionation, the ASM1 overrides): name -> (edit of demo.toml, a fragment of the expected error line).
BROKEN = {
    "parser": (lambda t: t.replace("valve_capacity_Sm3_h = 4000.0", "valve_capacity_Sm3h = 4000.0", 1),
               "valve_capacity_Sm3h"),
    "sote fit": (lambda t: _between(t, "sote_points = [", "headloss_points = [", _SOTE_THREE_POINTS),
                 "sote_points: fewer test points than fitted parameters"),
    "headloss fit": (lambda t: _between(t, "headloss_points = [", "\n# Zones", _HEADLOSS_ONE_POINT),
                     "headloss_points: too few points"),
    "tkn": (lambda t: t.replace("xbh_of_cod = 0.07", "xbh_of_cod = 0.3"),
            "influent.tkn_mg_L, period 1: TKN is below NH4-N"),
    "asm1 override": (lambda t: t.replace('parameter_set = "asm1_20C"\n',
                                          'parameter_set = "asm1_20C"\noverrides = { Y_H = 1.5 }\n'),
                      "kinetics.overrides.Y_H: out of range"),
}


def _commands(layout: Path, tmp: Path) -> dict:
    grid = tmp / "grid.toml"
    grid.write_text('[grid]\n"zones.Z3.alpha" = [0.5, 0.6]\n')
    data = tmp / "data.csv"  # never read: the layout is rejected first
    return {
        "check": ["check", str(layout), "--no-prescreen"],
        "optimize": ["optimize", str(layout), "--out", str(tmp / "o"), "--quiet", "--no-report"],
        "simulate": ["simulate", str(layout), "--out", str(tmp / "s")],
        "calibrate": ["calibrate", str(layout), "--data", str(data), "--out", str(tmp / "c"), "--quiet"],
        "sweep": ["sweep", str(layout), "--grid", str(grid), "--out", str(tmp / "w"), "--quiet", "--no-report"],
        "year": ["year", str(layout), "--out", str(tmp / "y"), "--quiet", "--no-report"],
        "design": ["design", str(layout), "--out", str(tmp / "d"), "--quiet"],
    }


@pytest.mark.parametrize("name", list(BROKEN))
def test_check_rejects_every_layout_the_computing_commands_reject(name, tmp_path, capsys):
    """Every command reads the layout through the one resolution step (`airtaper.plant.load_plant`): a layout
    `check` passes, none rejects for its input, and one it rejects they all reject with the same lines, exit 2,
    before writing anything."""
    edit, fragment = BROKEN[name]
    text = edit(DEMO.read_text())
    assert text != DEMO.read_text()
    layout = tmp_path / "bad.toml"
    layout.write_text(text)
    shutil.copy(ROOT / "layouts" / "demo_influent.csv", tmp_path / "demo_influent.csv")
    errors = {}
    for command, argv in _commands(layout, tmp_path).items():
        code = main(argv)
        err = capsys.readouterr().err
        assert code == EXIT_INPUT, (command, err)
        assert "Traceback" not in err
        errors[command] = [line for line in err.splitlines() if line.startswith("error: ")]
    assert errors["check"] and any(fragment in line for line in errors["check"]), errors["check"]
    assert all(line.startswith(f"error: {layout}: ") for line in errors["check"])
    for command, lines in errors.items():
        assert lines == errors["check"], command
    assert not any((tmp_path / d).exists() for d in "oscwyd")
