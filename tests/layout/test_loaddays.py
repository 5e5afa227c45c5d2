"""Load days and capital costs: parsing, their one error form, and the Layout of one day."""

from __future__ import annotations

import copy
import os
import shutil

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from airtaper.errors import InputError
from airtaper.layout import day_layout, layout_days, layout_input_files, layout_to_data, load_layout, parse_layout
from airtaper.layout import defaults as D
from airtaper.layout.loaddays import scaled_influent, with_grid_counts
from airtaper.layout.reader import LayoutWarning

from .conftest import LAYOUTS, error_lines

E = "error: bad.toml: "
N_EXAMPLES = int(os.environ.get("AIRTAPER_FUZZ_EXAMPLES", "200"))


def _day(data, day_id):
    return next(d for d in data["load_days"] if d["id"] == day_id)


def _parse(data, warnings=None):
    return parse_layout(data, "demo.toml", LAYOUTS, warnings=warnings)


# --- what the demo's days resolve to ---------------------------------------------------------------------
def test_demo_days_take_their_basis_factors_and_their_own(demo_data):
    layout = _parse(demo_data)
    days = {d.id: d for d in layout.load_days}
    assert [d.id for d in layout.load_days] == ["average", "winter", "summer", "max-month", "peak", "minimum"]
    assert (days["max-month"].flow_factor, days["max-month"].load_factor) == D.LOAD_DAY_BASES["maximum_month"]
    assert (days["minimum"].flow_factor, days["minimum"].load_factor) == D.LOAD_DAY_BASES["minimum_day"]
    assert (days["peak"].flow_factor, days["peak"].load_factor) == (1.3, 1.5)  # given: they override the basis
    assert sum(d.days_per_year for d in layout.load_days) == D.DAYS_PER_YEAR
    assert layout.capital.cost_per_diffuser == 90.0 and layout.zones[1].grid.count_step == 20


def test_day_layout_changes_only_what_the_day_names(demo_data):
    layout = _parse(demo_data)
    peak = next(d for d in layout.load_days if d.id == "peak")
    day = day_layout(layout, peak)
    base, inf = layout.influent, day.influent
    for p in range(layout.horizon.n_periods):
        assert inf.flow_m3_d[p] == pytest.approx(1.3 * base.flow_m3_d[p])
        # loads (flow x concentration) scale by the load factor; alkalinity keeps its concentration
        for c in ("cod_total_mg_L", "cod_soluble_mg_L", "tkn_mg_L", "nh4_mg_L", "tss_mg_L"):
            assert inf.flow_m3_d[p] * getattr(inf, c)[p] == pytest.approx(
                1.5 * base.flow_m3_d[p] * getattr(base, c)[p])
        assert inf.alkalinity_mol_m3[p] == base.alkalinity_mol_m3[p]
        # the ratio-given recycle and return sludge follow the day's flow
        assert day.recycles[0].flow_m3_d[p] == pytest.approx(2.5 * inf.flow_m3_d[p])
        assert day.return_sludge.flow_m3_d[p] == pytest.approx(0.8 * inf.flow_m3_d[p])
    assert [z.alpha for z in day.zones] == pytest.approx([0.9 * z.alpha for z in layout.zones])
    assert day.plant == layout.plant and day.inlet_air == layout.inlet_air and day.limits == layout.limits
    assert day.load_days == () and day.blowers == layout.blowers


def test_winter_day_takes_its_temperatures(demo_data):
    layout = _parse(demo_data)
    winter = day_layout(layout, layout.load_days[1])
    assert set(winter.plant.temperature_C) == {12.0} and set(winter.inlet_air.temperature_C) == {5.0}
    assert winter.influent == layout.influent  # factors 1: the base profile itself


def test_day_limits_replace_only_what_they_name(demo_data):
    _day(demo_data, "winter")["limits"] = {"nh4_mean_mg_L": 2.0, "nh4_max_mg_L": 5.0}
    layout = _parse(demo_data)
    lim = day_layout(layout, layout.load_days[1]).limits
    assert (lim.nh4_mean_mg_L, lim.nh4_max_mg_L, lim.tn_mean_mg_L) == (2.0, 5.0, layout.limits.tn_mean_mg_L)


def test_day_zone_do_limits_replace_the_zones_own_on_that_day_only(demo_data):
    # the demo's minimum day accepts Z6 up to 3.5 mg/L; every other zone and day keeps the zone's own range
    layout = _parse(demo_data)
    days = {d.id: d for d in layout.load_days}
    own = {z.id: (z.do_min_mg_L, z.do_max_mg_L) for z in layout.zones}
    for d in layout.load_days:
        zones = {z.id: (z.do_min_mg_L, z.do_max_mg_L) for z in day_layout(layout, d).zones}
        assert zones == (dict(own, Z6=(1.0, 3.5)) if d.id == "minimum" else own), d.id
    assert own["Z6"] == (1.0, 2.5)
    # a day's DO minimum alone keeps the zone's maximum
    _day(demo_data, "summer")["zones"] = {"Z3": {"do_min_mg_L": 1.5}}
    layout = _parse(demo_data)
    summer = next(d for d in layout.load_days if d.id == "summer")
    z3 = next(z for z in day_layout(layout, summer).zones if z.id == "Z3")
    assert (z3.do_min_mg_L, z3.do_max_mg_L) == (1.5, None)
    assert parse_layout(layout_to_data(layout), "demo.toml", LAYOUTS) == layout
    assert days["minimum"].zone_do[0].do_max_mg_L == 3.5


def test_layout_without_days_has_its_base_profile_as_the_year(demo_data):
    del demo_data["load_days"]
    layout = _parse(demo_data)
    (only,) = layout_days(layout)
    assert only.days_per_year == D.DAYS_PER_YEAR
    assert day_layout(layout, only) == layout


def test_day_with_its_own_profile_reads_the_csv_and_is_an_input_file(tmp_path, demo_data):
    shutil.copy(LAYOUTS / "demo_influent.csv", tmp_path / "demo_influent.csv")
    text = (LAYOUTS / "demo_influent.csv").read_text().splitlines()
    header = next(i for i, line in enumerate(text) if line.startswith("time_h"))
    fi = text[header].split(",").index("flow_m3_d")
    rows = text[:header + 1]
    for line in text[header + 1:]:
        cells = line.split(",")
        if line.strip() and not line.startswith("#"):
            cells[fi] = f"{2.0 * float(cells[fi]):g}"
        rows.append(",".join(cells))
    (tmp_path / "storm.csv").write_text("\n".join(rows) + "\n")
    demo_data["load_days"].append({"id": "storm", "days_per_year": 3.0, "influent_csv": "storm.csv"})
    layout = parse_layout(demo_data, str(tmp_path / "demo.toml"), tmp_path)
    storm = layout.load_days[-1]
    assert storm.influent.source == "storm.csv"
    assert sum(storm.influent.flow_m3_d) == pytest.approx(2.0 * sum(layout.influent.flow_m3_d))
    assert day_layout(layout, storm).influent is storm.influent
    assert layout_input_files(tmp_path / "demo.toml", layout)[-1] == str(tmp_path / "storm.csv")
    assert parse_layout(layout_to_data(layout), layout.path, tmp_path) == layout


def test_with_grid_counts_replaces_only_the_named_zones(demo_data):
    layout = _parse(demo_data)
    other = with_grid_counts(layout, {"Z3": 700})
    assert [z.grid.count if z.grid else None for z in other.zones] == [None, 800, 700, 560, 460, 380]
    assert other.zones[2].grid.count_step == 20


def test_weights_off_a_year_warn(demo_data):
    _day(demo_data, "average")["days_per_year"] = 150.0
    warnings: list[LayoutWarning] = []
    _parse(demo_data, warnings)
    assert [str(w) for w in warnings] == [
        "warning: demo.toml: load_days: the days stand for 315 days, not a year (365): annual sums scale with "
        "their weights"]


# --- one error form ----------------------------------------------------------------------------------------
def _set_day(day_id, key, value):
    def apply(d):
        _day(d, day_id)[key] = value
    return apply


def _no_tariff(d):
    del d["tariff"]
    d["operation"]["objective"] = "energy"


def _drop(day_id, key):
    def apply(d):
        del _day(d, day_id)[key]
    return apply


CASES = [
    ("factor-in-percent", _set_day("max-month", "flow_factor", 120),
     [E + "load_days.max-month.flow_factor: factor 120: was it typed in percent? (got 120, expected a factor "
          "(1.2 for 120 %))"]),
    ("factor-not-positive", _set_day("peak", "load_factor", 0.0),
     [E + "load_days.peak.load_factor: must be positive (got 0.0, expected > 0)"]),
    ("unknown-basis", _set_day("peak", "basis", "peak"),
     [E + "load_days.peak.basis: unknown value, did you mean 'peak_day'? (got 'peak', expected one of "
          "average_day, maximum_month, peak_day, minimum_day, winter, summer)"]),
    ("winter-without-temperature", _drop("winter", "water_temperature_C"),
     [E + "load_days.winter.water_temperature_C: a winter day needs its own water temperature (expected a "
          "number, or one per period, in degC)"]),
    ("weight-missing", _drop("summer", "days_per_year"),
     [E + "load_days.summer.days_per_year: missing required key (expected a number)"]),
    ("weight-above-a-year", _set_day("summer", "days_per_year", 400.0),
     [E + "load_days.summer.days_per_year: out of range (got 400.0, expected > 0 and <= 366)"]),
    ("csv-and-factors", _set_day("peak", "influent_csv", "demo_influent.csv"),
     [E + "load_days.peak.flow_factor: scales the base profile, and this day has its own influent_csv (expected "
          "influent_csv alone, or flow_factor / load_factor alone)",
      E + "load_days.peak.load_factor: scales the base profile, and this day has its own influent_csv (expected "
          "influent_csv alone, or flow_factor / load_factor alone)"]),
    ("day-limit-max-below-mean", _set_day("summer", "limits", {"nh4_max_mg_L": 0.5}),
     [E + "load_days.summer.limits.nh4_max_mg_L: the maximum period mean must not be below the daily mean "
          "(got 0.5, expected >= nh4_mean_mg_L = 1)"]),
    ("day-limit-unknown", _set_day("summer", "limits", {"do_min_mg_L": 1.0}),
     [E + "load_days.summer.limits.do_min_mg_L: unknown key, did you mean 'tn_mean_mg_L'?"]),
    ("day-key-typo", _set_day("summer", "water_temperatur_C", 20.0),
     [E + "load_days.summer.water_temperatur_C: unknown key, did you mean 'water_temperature_C'?"]),
    ("duplicate-day", _set_day("summer", "id", "winter"),
     [E + "load_days[3].id: duplicate id (got 'winter', expected ids unique within load_days)"]),
    ("no-days", lambda d: d.__setitem__("load_days", []),
     [E + "load_days: empty (expected at least one [[load_days]] table, or none at all)"]),
    ("interest-in-percent", lambda d: d["capital"].__setitem__("interest_rate", 5.0),
     [E + "capital.interest_rate: interest rate 5: was it typed in percent? (got 5.0, expected a fraction "
          "(0.05 for 5 %))"]),
    ("capital-without-cost", lambda d: d["capital"].pop("cost_per_diffuser"),
     [E + "capital.cost_per_diffuser: missing required key (expected a number)"]),
    ("capital-without-tariff", _no_tariff,
     [E + "capital: capital costs are weighed against the energy bill, which needs prices (expected a [tariff] "
          "(its currency and price_per_kWh) as well)"]),
    ("day-zone-unknown", _set_day("minimum", "zones", {"Z9": {"do_max_mg_L": 3.0}}),
     [E + "load_days.minimum.zones.Z9: no such zone (got 'Z9', expected the id of an aerated or swing zone (Z2, Z3, "
          "Z4, Z5, Z6))"]),
    ("day-zone-anoxic", _set_day("minimum", "zones", {"Z1": {"do_max_mg_L": 3.0}}),
     [E + "load_days.minimum.zones.Z1: an anoxic zone takes no air (expected an aerated or swing zone's id)"]),
    ("day-do-max-below-the-zones-minimum", _set_day("minimum", "zones", {"Z6": {"do_max_mg_L": 0.8}}),
     [E + "load_days.minimum.zones.Z6.do_max_mg_L: must exceed the day's DO minimum (got 0.8, expected > 1)"]),
    ("day-do-min-above-the-zones-maximum", _set_day("summer", "zones", {"Z6": {"do_min_mg_L": 3.0}}),
     [E + "load_days.summer.zones.Z6.do_min_mg_L: must be below the zone's DO maximum (2.5) (got 3.0, expected "
          "< 2.5)"]),
    ("day-do-max-not-a-number", _set_day("minimum", "zones", {"Z6": {"do_max_mg_L": "high"}}),
     [E + "load_days.minimum.zones.Z6.do_max_mg_L: must be a number (got 'high', expected a number)"]),
    ("day-do-max-out-of-range", _set_day("minimum", "zones", {"Z6": {"do_max_mg_L": 30.0}}),
     [E + "load_days.minimum.zones.Z6.do_max_mg_L: out of range (got 30.0, expected > 0 and <= 20)"]),
    ("day-zone-empty", _set_day("minimum", "zones", {"Z6": {}}),
     [E + "load_days.minimum.zones.Z6: names no DO limit (expected do_min_mg_L and/or do_max_mg_L, in mg/L)"]),
    ("day-zone-key-typo", _set_day("minimum", "zones", {"Z6": {"do_max": 3.0}}),
     [E + "load_days.minimum.zones.Z6.do_max: unknown key, did you mean 'do_max_mg_L'?"]),
    ("day-zone-not-a-table", _set_day("minimum", "zones", {"Z6": 3.0}),
     [E + "load_days.minimum.zones.Z6: must be a table (got 3.0, expected a table)"]),
    ("count-step-zero", lambda d: d["zones"][2]["grid"].__setitem__("count_step", 0),
     [E + "zones.Z3.grid.count_step: out of range (got 0, expected >= 1 and <= 1e+07)"]),
]


@pytest.mark.parametrize("mutate,expected", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_invalid_load_day_or_capital_message(mutate, expected, demo_data):
    mutate(demo_data)
    assert error_lines(demo_data) == expected


def test_alpha_factor_that_lifts_a_zone_above_the_bound(demo_data):
    _day(demo_data, "peak")["alpha_factor"] = 1.9
    demo_data["zones"][5]["alpha"] = 0.7  # 0.7 x 1.9 = 1.33 > 1.2; the other zones stay below
    assert error_lines(demo_data) == [
        E + "load_days.peak.alpha_factor: makes zone Z6's alpha 1.33, above 1.2 (got 1.9, expected <= 1.714)"]


def test_missing_day_csv_is_named_by_its_key(demo_data):
    _day(demo_data, "average")["influent_csv"] = "no_such.csv"
    (line,) = error_lines(demo_data)
    assert line.startswith(E + "load_days.average.influent_csv: ") and "no_such.csv" in line


def test_day_flow_below_a_fixed_waste_flow(demo_data):
    demo_data["flows"]["waste"] = {"flow_m3_d": 5000.0}
    # the first period the minimum day falls below 5000 m3/d: 03:00-04:00, 0.7 x the CSV row 6690 = 4683 m3/d
    assert error_lines(demo_data) == [
        E + "load_days.minimum.flow_factor: the day's influent flow is not above the waste flow (period 4) "
            "(got 4683.0, expected > flows.waste.flow_m3_d = 5000 m3/d)"]


# --- properties --------------------------------------------------------------------------------------------
factors = st.floats(min_value=0.05, max_value=10.0, allow_nan=False)


@settings(max_examples=N_EXAMPLES, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(flow_f=factors, load_f=factors)
def test_scaling_conserves_loads_and_flows(flow_f, load_f, demo_data):
    layout = _parse(demo_data)
    base = layout.influent
    inf = scaled_influent(base, flow_f, load_f)
    q0, q1 = sum(base.flow_m3_d), sum(inf.flow_m3_d)
    assert q1 == pytest.approx(flow_f * q0, rel=1e-12)
    for c in ("cod_total_mg_L", "tkn_mg_L", "nh4_mg_L", "tss_mg_L"):
        load0 = sum(q * x for q, x in zip(base.flow_m3_d, getattr(base, c)))
        load1 = sum(q * x for q, x in zip(inf.flow_m3_d, getattr(inf, c)))
        assert load1 == pytest.approx(load_f * load0, rel=1e-12)
    # the profile's shape (each period's share of the day) is kept
    assert [q / q1 for q in inf.flow_m3_d] == pytest.approx([q / q0 for q in base.flow_m3_d], rel=1e-12)


@settings(max_examples=N_EXAMPLES, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(flow_f=factors, load_f=factors)
def test_scaled_asm1_influent_keeps_oxygen_and_alkalinity(flow_f, load_f):
    from airtaper.layout.bsm1 import bsm1_layout
    from airtaper.layout.types import ASM1_COMPONENTS
    base = bsm1_layout().influent
    inf = scaled_influent(base, flow_f, load_f)
    for row0, row1 in zip(base.asm1_mg_L, inf.asm1_mg_L):
        for name, a, b in zip(ASM1_COMPONENTS, row0, row1):
            expected = a if name in ("SO", "SALK") else a * load_f / flow_f
            assert b == pytest.approx(expected, rel=1e-12, abs=1e-300)


day_values = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True), st.integers(-10**6, 10**6), st.booleans(), st.text(max_size=8),
    st.sampled_from(list(D.LOAD_DAY_BASES) + ["peak", "Winter", "storm.csv", ""]),
    st.lists(st.floats(min_value=-5, max_value=50), max_size=25), st.dictionaries(st.text(max_size=6),
                                                                                   st.floats(), max_size=3),
    # a day's zone DO limits ([load_days.zones.<id>]): known and unknown zones, keys and values
    st.dictionaries(st.sampled_from(["Z1", "Z2", "Z6", "Q9", ""]), st.one_of(
        st.dictionaries(st.sampled_from(["do_min_mg_L", "do_max_mg_L", "do_max"]),
                        st.one_of(st.floats(), st.integers(-5, 30), st.text(max_size=3)), max_size=2),
        st.floats()), max_size=3),
)
day_keys = st.sampled_from(["id", "days_per_year", "basis", "flow_factor", "load_factor", "influent_csv",
                            "water_temperature_C", "air_temperature_C", "alpha_factor", "limits", "zones", "other"])


@settings(max_examples=N_EXAMPLES, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(days=st.lists(st.dictionaries(day_keys, day_values, max_size=8), max_size=4),
       capital=st.dictionaries(st.sampled_from(["cost_per_diffuser", "cost_per_zone", "interest_rate",
                                                "life_years", "x"]), day_values, max_size=5))
def test_random_days_and_capital_give_input_errors_or_a_round_trip(days, capital, demo_data):
    data = copy.deepcopy(demo_data)
    data["load_days"] = days
    data["capital"] = capital
    try:
        layout = parse_layout(data, "fuzz.toml", LAYOUTS)
    except InputError as exc:
        assert exc.problems and all(str(p).startswith("error: fuzz.toml: ") for p in exc.problems)
        assert all("\n" not in str(p) for p in exc.problems)
        return
    assert parse_layout(layout_to_data(layout), "fuzz.toml", LAYOUTS) == layout
    for day in layout_days(layout):
        one = day_layout(layout, day)
        assert len(one.influent.flow_m3_d) == layout.horizon.n_periods and min(one.influent.flow_m3_d) > 0


def test_shipped_demo_loads_with_its_days():
    layout = load_layout(LAYOUTS / "demo.toml")
    assert len(layout.load_days) == 6 and layout.capital is not None
