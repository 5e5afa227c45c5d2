"""Fuzzing the command line: whatever a user can write as layout, influent CSV or schedule, the error contract holds.

Every generated input goes through ``airtaper.cli.main.main([...])`` exactly as a
user would run it. The contract:

* exit 0 (the input is valid, perhaps odd: warnings allowed), 3 (valid, but the pre-screen of `check` shows
  the limits cannot be met) or 2 (bad input), never 1 (an internal failure) and never a traceback;
* on exit 2, every line on stderr is one clean line ``error: <file>: <key or row/column>: <problem>``
  (or a ``warning: ...`` naming a likely cause), saying what was expected or what was meant;
* nothing is written: a ``simulate --out`` on the same bad input leaves no folder, and no staging folder.

The inputs are the shipped layouts and the demo's influent CSV with a few
mistakes of the kinds users make: numbers in the wrong unit (x 1000, / 1000,
x 60, / 100, feet), signs, zeros, 20-digit integers, numbers beyond the float
range, NaN and infinity, words and dates for numbers, deeply nested arrays,
control characters in quoted keys and CSV headers, typos in keys, lines
deleted, duplicated or cut off, files that are devices (``/dev/zero``) or
folders, bytes that are not UTF-8. ``AIRTAPER_FUZZ_EXAMPLES`` sets the number of
examples per test (200 by default; ``AIRTAPER_FUZZ_EXAMPLES=2000`` for a longer
hunt). ``python tests/cli/test_fuzz_cli.py N`` runs N variants of each kind with a
fixed seed and prints the outcome counts.
"""

from __future__ import annotations

import contextlib
import io
import os
import random
import re
import shutil
import sys
import tempfile
from collections import Counter
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from airtaper.cli.main import main

ROOT = Path(__file__).resolve().parents[2]
LAYOUTS = ROOT / "layouts"
DEMO_TEXT = (LAYOUTS / "demo.toml").read_text()
THREE_TEXT = (LAYOUTS / "three_tank.toml").read_text()
CSV_TEXT = (LAYOUTS / "demo_influent.csv").read_text()

N_EXAMPLES = int(os.environ.get("AIRTAPER_FUZZ_EXAMPLES", "200"))
FUZZ = settings(max_examples=N_EXAMPLES, deadline=None, derandomize=False,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])

# --- mistakes -------------------------------------------------------------------------------------
NUMBER = re.compile(r"(?<![\w.\"-])-?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?(?![\w.\"])")
STRING = re.compile(r'"[^"\n]*"')
KEY = re.compile(r"^(\s*)([A-Za-z_][A-Za-z0-9_]*)(\s*=)", re.M)


def _deep(rng: random.Random) -> str:
    depth = rng.choice([30, 200, 600, 3000])
    return "[" * depth + "1" + "]" * depth


def _number_slip(rng: random.Random, text: str) -> str:
    """A number in another unit, of another sign, or no number at all."""
    x = float(text)
    choices = [
        lambda: f"{x * 1000:g}", lambda: f"{x / 1000:g}", lambda: f"{x * 60:g}", lambda: f"{x / 60:g}",
        lambda: f"{x / 100:g}", lambda: f"{x * 100:g}", lambda: f"{x / 0.3048:.0f}", lambda: f"{-x:g}",
        lambda: "0", lambda: "0.0", lambda: "12345678901234567890", lambda: "-98765432109876543210",
        lambda: "1" + "0" * rng.choice([25, 400]), lambda: "1e400", lambda: "nan", lambda: "inf", lambda: "-inf",
        lambda: f'"{text}"', lambda: "true", lambda: "[]", lambda: "{}", lambda: "1979-05-27",
        lambda: "1e-320", lambda: _deep(rng), lambda: f"[{text}, {text}]",
    ]
    return rng.choice(choices)()


def _string_slip(rng: random.Random, text: str) -> str:
    inner = text[1:-1]
    choices = [
        lambda: '""', lambda: '"' + inner.upper() + '"', lambda: '"' + inner[:-1] + '"', lambda: '" ' + inner + '"',
        lambda: '"' + inner + '\\n' + inner + '"', lambda: '"' + inner + '\\u001b[31m"', lambda: '"' + "x" * 5000 + '"',
        lambda: "42", lambda: "[" + text + "]", lambda: '"/dev/zero"', lambda: '"/dev/null"', lambda: '"."',
        lambda: '"/"', lambda: '"missing.csv"', lambda: '"' + inner + '\\u0000"',
    ]
    return rng.choice(choices)()


def _key_slip(rng: random.Random, key: str) -> str:
    choices = [
        lambda: key[:-1], lambda: key + "s", lambda: key.upper(), lambda: key.replace("_", "", 1),
        lambda: '"' + key[:2] + '\\n' + key[2:] + '"', lambda: '"' + key + '\\u001b"', lambda: '"' + key + '\\t"',
        lambda: '"' + key + ' "', lambda: '""',
    ]
    return rng.choice(choices)()


def _replace_match(text: str, m: re.Match, new: str, group: int = 0) -> str:
    return text[:m.start(group)] + new + text[m.end(group):]


def mutate_layout(rng: random.Random, text: str) -> str:
    """One to three mistakes in a layout's text."""
    for _ in range(rng.randint(1, 3)):
        kind = rng.choices(["number", "string", "key", "line", "cut", "bytes"], weights=[10, 3, 3, 3, 1, 1])[0]
        if kind == "number":
            found = [m for m in NUMBER.finditer(text) if not _in_comment(text, m.start())]
            if found:
                m = rng.choice(found)
                text = _replace_match(text, m, _number_slip(rng, m.group(0)))
        elif kind == "string":
            found = [m for m in STRING.finditer(text) if not _in_comment(text, m.start())]
            if found:
                m = rng.choice(found)
                text = _replace_match(text, m, _string_slip(rng, m.group(0)))
        elif kind == "key":
            found = list(KEY.finditer(text))
            if found:
                m = rng.choice(found)
                text = _replace_match(text, m, _key_slip(rng, m.group(2)), 2)
        elif kind == "line":
            lines = text.split("\n")
            i = rng.randrange(len(lines))
            action = rng.choice(["delete", "duplicate", "swap"])
            if action == "delete":
                del lines[i]
            elif action == "duplicate":
                lines.insert(i, lines[i])
            elif i + 1 < len(lines):
                lines[i], lines[i + 1] = lines[i + 1], lines[i]
            text = "\n".join(lines)
        elif kind == "cut":
            text = text[:rng.randrange(len(text) + 1)]
        else:
            i = rng.randrange(len(text) + 1)
            text = text[:i] + rng.choice(["\x00", "\x1b[2J", "\u2028", "\ufeff", "\r"]) + text[i:]
    return text


def _in_comment(text: str, pos: int) -> bool:
    line_start = text.rfind("\n", 0, pos) + 1
    return "#" in text[line_start:pos]


def _scale_column(lines: list[str], rows: list[int], j: int, factor: float) -> None:
    """Column ``j`` of ``rows`` in another unit (x ``factor``), where its cells are numbers."""
    for i in rows:
        cells = lines[i].split(",")
        if j < len(cells):
            try:
                cells[j] = f"{float(cells[j]) * factor:g}"
            except ValueError:
                pass
        lines[i] = ",".join(cells)


def _replace_cell(rng: random.Random, lines: list[str], rows: list[int], choices: list[str]) -> None:
    i = rng.choice(rows)
    cells = lines[i].split(",")
    cells[rng.randrange(len(cells))] = rng.choice(choices)
    lines[i] = ",".join(cells)


def mutate_csv(rng: random.Random, text: str) -> str:
    """One to three mistakes in an influent CSV."""
    lines = text.split("\n")
    header_at = next(i for i, line in enumerate(lines) if line.startswith("time_h"))
    for _ in range(rng.randint(1, 3)):
        kind = rng.choices(["column", "cell", "header", "row", "cut", "junk"], weights=[4, 8, 3, 3, 1, 1])[0]
        names = lines[header_at].split(",")
        data_rows = [i for i in range(header_at + 1, len(lines)) if lines[i].strip()]
        if kind == "column" and data_rows:  # a whole column in another unit
            j = rng.randrange(len(names))
            _scale_column(lines, data_rows, j, rng.choice([1000.0, 0.001, 60.0, 1 / 60, 0.01, 24.0, 1 / 24, -1.0]))
        elif kind == "cell" and data_rows:
            _replace_cell(rng, lines, data_rows, ["", "abc", "1e400", "nan", "inf", "-5", "12345678901234567890",
                                                  "1,5", '"7"', "0", "3.5.1", "1e-400", "\x1b", "24", "23.999"])
        elif kind == "header":
            j = rng.randrange(len(names))
            names[j] = rng.choice([names[j].upper(), names[j][:-1], names[j] + "\x07", "nh3_mg_L", "",
                                   names[j].replace("_", " "), names[0], "\x1b[31m" + names[j]])
            lines[header_at] = ",".join(names)
        elif kind == "row" and data_rows:
            i = rng.choice(data_rows)
            action = rng.choice(["delete", "duplicate", "extra field", "short"])
            if action == "delete":
                del lines[i]
            elif action == "duplicate":
                lines.insert(i, lines[i])
            elif action == "extra field":
                lines[i] += ",1"
            else:
                lines[i] = lines[i].rsplit(",", 1)[0]
        elif kind == "cut":
            joined = "\n".join(lines)
            lines = joined[:rng.randrange(len(joined) + 1)].split("\n")
            if not any(line.startswith("time_h") for line in lines):
                return "\n".join(lines)
            header_at = next(i for i, line in enumerate(lines) if line.startswith("time_h"))
        else:
            i = rng.randrange(len(lines))
            lines[i] = lines[i] + rng.choice(["\x00", "\ufffe", ",,,", ";", "\r\r"])
    return "\n".join(lines)


# --- running one variant --------------------------------------------------------------------------
ERROR_LINE = re.compile(r"^error: (?P<file>[^:]+): (?P<key>(?:[^:'\"]|\"(?:[^\"\\]|\\.)*\"|'(?:[^'\\]|\\.)*')+?): "
                        r"(?P<problem>.+)$")


def _run(argv: list[str]) -> tuple[int, str]:
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        code = main(argv)
    return code, err.getvalue()


def contract_outcome(layout_text: str, csv_text: str | bytes, workdir: Path) -> str:
    """Run ``check`` (and ``simulate`` on bad input) on one variant; return "valid" or "refused", or what broke."""
    folder = workdir / "plant"
    shutil.rmtree(folder, ignore_errors=True)
    folder.mkdir()
    layout = folder / "plant.toml"
    layout.write_bytes(layout_text.encode("utf-8", "surrogatepass"))
    raw = csv_text.encode("utf-8", "surrogatepass") if isinstance(csv_text, str) else csv_text
    (folder / "demo_influent.csv").write_bytes(raw)
    code, err = _run(["check", str(layout)])
    lines = err.splitlines()
    if code not in (0, 2, 3):  # 3: a valid layout whose limits the pre-screen already shows cannot be met
        return f"exit {code}: {err.strip()[:300]}"
    if "Traceback" in err or "internal failure" in err:
        return "traceback: " + err[:300]
    for line in lines:
        if not line.isprintable():
            return f"not one clean line: {line!r}"
        if not (line.startswith("error: ") or line.startswith("warning: ")):
            return f"not an error or warning line: {line!r}"
    errors = [line for line in lines if line.startswith("error: ")]
    if code in (0, 3):
        if errors:
            return f"errors with exit {code}: {errors[0]}"
        if code == 3:
            return "valid, limits cannot be met"
        return "valid, warned" if lines else "valid"
    if not errors:
        return "exit 2 without an error line"
    for line in errors:
        m = ERROR_LINE.match(line)
        if m is None or not m.group("key").strip():
            return f"no file and key: {line!r}"
        if "expected" not in line and "did you mean" not in line and "was it" not in line and "were the" not in line:
            return f"no expectation: {line!r}"
    out = workdir / "out"
    code2, _ = _run(["simulate", str(layout), "--out", str(out), "--max-days", "1"])
    if code2 != 2:
        return f"simulate exit {code2} where check refused"
    if out.exists() or any(p.name.startswith(".out") for p in workdir.iterdir()):
        return "simulate wrote something for a refused input"
    return "refused"


OK = {"valid", "valid, warned", "valid, limits cannot be met", "refused"}


@contextlib.contextmanager
def _workdir():
    with tempfile.TemporaryDirectory(prefix="airtaper-fuzz-") as tmp:
        yield Path(tmp)


@FUZZ
@given(st.randoms(use_true_random=False), st.sampled_from(["demo", "three"]))
def test_fuzzed_layouts_keep_the_error_contract(rng, base):
    text = mutate_layout(rng, DEMO_TEXT if base == "demo" else THREE_TEXT)
    with _workdir() as work:
        outcome = contract_outcome(text, CSV_TEXT, work)
    assert outcome in OK, outcome


@FUZZ
@given(st.randoms(use_true_random=False))
def test_fuzzed_influent_files_keep_the_error_contract(rng):
    csv_text: str | bytes = mutate_csv(rng, CSV_TEXT)
    if rng.random() < 0.05:
        csv_text = bytes(rng.randrange(256) for _ in range(rng.randrange(1, 400)))
    with _workdir() as work:
        outcome = contract_outcome(DEMO_TEXT, csv_text, work)
    assert outcome in OK, outcome


def test_special_files_as_inputs_keep_the_error_contract():
    with _workdir() as work:
        for special in ("/dev/zero", "/dev/null", str(work), str(work / "missing.csv")):
            text = DEMO_TEXT.replace('csv = "demo_influent.csv"', f'csv = "{special}"')
            assert contract_outcome(text, CSV_TEXT, work) == "refused", special
        for special in ("/dev/zero", "/dev/null", str(work)):
            code, err = _run(["check", special])
            assert code == 2 and err.startswith(f"error: {special}: (file): cannot read the layout: "), err


# --- census: `python tests/cli/test_fuzz_cli.py N` ----------------------------------------------------
def census(n: int, seed: int = 12) -> dict[str, Counter]:
    """Outcome counts of ``n`` layout variants and ``n`` influent variants drawn with a fixed seed."""
    rng = random.Random(seed)
    counts = {"layouts": Counter(), "influent files": Counter()}
    with _workdir() as work:
        for i in range(n):
            base = DEMO_TEXT if i % 2 == 0 else THREE_TEXT
            outcome = contract_outcome(mutate_layout(rng, base), CSV_TEXT, work)
            counts["layouts"][outcome if outcome in OK else outcome.split(":")[0]] += 1
            outcome = contract_outcome(DEMO_TEXT, mutate_csv(rng, CSV_TEXT), work)
            counts["influent files"][outcome if outcome in OK else outcome.split(":")[0]] += 1
    return counts


if __name__ == "__main__":
    for what, counter in census(int(sys.argv[1]) if len(sys.argv) > 1 else 200).items():
        print(what, sum(counter.values()), dict(counter.most_common()))


#: Valid-but-odd layouts simulated per run (each takes seconds): a twentieth of the fuzz examples, at least 5.
N_SIMULATED = max(5, N_EXAMPLES // 20)


@pytest.mark.slow
@settings(max_examples=N_SIMULATED, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.randoms(use_true_random=False))
def test_valid_but_odd_layouts_simulate_without_crashing(rng):
    """A mutated layout that `check` accepts (warnings allowed) must simulate: exit 0 and the whole set written."""
    with _workdir() as work:
        for _ in range(100):  # most mutations are refused: draw until one passes `check`
            base = DEMO_TEXT if rng.random() < 0.5 else THREE_TEXT
            text = mutate_layout(rng, base)
            if contract_outcome(text, CSV_TEXT, work) in ("valid", "valid, warned"):
                break
        else:
            return
        out = work / "out"
        code, err = _run(["simulate", str(work / "plant" / "plant.toml"), "--out", str(out), "--max-days", "1"])
        assert code == 0, err[-500:]
        assert sorted(p.name for p in out.iterdir() if not p.name.startswith(".")) == [
            "effluent.csv", "summary.json", "timeseries.csv"]


# --- schedules for `simulate --schedule` ----------------------------------------------------------------
def _three_schedule_text() -> str:
    lines = ["period_start_h,zone,airflow_Sm3_h,do_mean_mg_L"]
    for k in range(24):
        for zone, q in (("T1", 900.0), ("T2", 700.0), ("T3", 550.0)):
            lines.append(f"{k:g},{zone},{q:g},1.5")
    return "\n".join(lines) + "\n"


SCHEDULE_TEXT = _three_schedule_text()


def mutate_schedule(rng: random.Random, text: str) -> str:
    lines = text.split("\n")
    for _ in range(rng.randint(1, 3)):
        kind = rng.choice(["scale", "cell", "row", "header", "cut"])
        body = [i for i in range(1, len(lines)) if lines[i].strip()]
        if kind == "scale" and body:
            _scale_column(lines, body, 2, rng.choice([1 / 60, 60.0, 1000.0, 0.001, -1.0, 3600.0]))
        elif kind == "cell" and body:
            _replace_cell(rng, lines, body, ["", "x", "nan", "inf", "-1", "1e400", "0.5", "25", "T9", "t1", "\x1b",
                                             "3.0001"])
        elif kind == "row" and body:
            i = rng.choice(body)
            if rng.random() < 0.5:
                del lines[i]
            else:
                lines.insert(i, lines[i])
        elif kind == "header":
            names = lines[0].split(",")
            j = rng.randrange(len(names))
            names[j] = rng.choice(["", names[j].upper(), names[j] + "\x07", "airflow_Sm3_min", "zone"])
            lines[0] = ",".join(names)
        else:
            joined = "\n".join(lines)
            lines = joined[:rng.randrange(len(joined) + 1)].split("\n")
    return "\n".join(lines)


@settings(max_examples=max(10, N_EXAMPLES // 10), deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.randoms(use_true_random=False))
def test_fuzzed_schedules_keep_the_error_contract(rng):
    with _workdir() as work:
        sched = work / "schedule.csv"
        sched.write_bytes(mutate_schedule(rng, SCHEDULE_TEXT).encode("utf-8", "surrogatepass"))
        out = work / "out"
        code, err = _run(["simulate", str(LAYOUTS / "three_tank.toml"), "--out", str(out), "--schedule", str(sched),
                          "--max-days", "1"])
        assert code in (0, 2), err[-500:]
        lines = err.splitlines()
        assert all(line.isprintable() and line.startswith(("error: ", "warning: ")) for line in lines), lines
        if code == 2:
            errors = [line for line in lines if line.startswith("error: ")]
            assert errors and all(line.startswith(f"error: {sched}: ") and "expected" in line for line in errors), \
                errors
            assert sorted(p.name for p in work.iterdir()) == ["schedule.csv"]  # nothing written
        else:
            assert (out / "summary.json").is_file()
