"""Invalid layouts: each mistake gives its own precise `error: <file>: <key path>: <problem>` line."""

from __future__ import annotations

import os
import shutil

import pytest

from airtaper.errors import InputError
from airtaper.layout import load_layout, parse_layout


def _zone(d, zone_id):
    return next(z for z in d["zones"] if z["id"] == zone_id)


def _set(path, value):
    """A mutator setting d[path...] = value (path of keys / indices, zone ids as 'zones:<id>')."""
    def apply(d):
        node = d
        for k in path[:-1]:
            node = _zone(d, k[6:]) if isinstance(k, str) and k.startswith("zones:") else node[k]
        node[path[-1]] = value
    return apply


def _all_out_of_service(d):
    for b in d["blowers"]:
        b["out_of_service"] = True


def _typo(d):
    z = _zone(d, "Z3")
    z["volme_m3"] = z.pop("volume_m3")


def _no_grid(d):
    del _zone(d, "Z4")["grid"]


def _anoxic_grid(d):
    _zone(d, "Z1")["grid"] = {"type": "disc_040", "count": 100, "submergence_m": 5.2}


def _no_tariff(d):
    del d["tariff"]
    del d["capital"]  # its own need of a tariff is tested in test_loaddays.py


def _rename_blowers(d):
    d["blower"] = d.pop("blowers")


def _unreachable(d):
    d["flows"]["step_feed"] = [{"zone": "Z3", "fraction": 1.0}]
    d["flows"]["return_sludge"]["to_zone"] = "Z3"
    d["flows"]["recycles"][0]["to_zone"] = "Z3"


def _short_step_feed(d):
    d["flows"]["step_feed"] = [{"zone": "Z1", "fraction": 0.7}, {"zone": "Z3", "fraction": 0.2}]


E = "error: bad.toml: "

# (id, base layout, mutation, the exact lines expected)
CASES = [
    ("negative-volume", "demo", _set(["zones:Z2", "volume_m3"], -900.0),
     [E + "zones.Z2.volume_m3: must be positive (got -900.0, expected > 0)"]),
    ("volume-as-text", "demo", _set(["zones:Z2", "volume_m3"], "900"),
     [E + "zones.Z2.volume_m3: must be a number (got '900', expected a number)"]),
    ("key-typo", "demo", _typo,
     [E + "zones.Z3.volume_m3: missing required key (expected a number)",
      E + "zones.Z3.volme_m3: unknown key, did you mean 'volume_m3'?"]),
    ("aerated-zone-without-diffusers", "demo", _no_grid,
     [E + "zones.Z4.grid: aerated zone has no diffusers (expected a [zones.grid] table (or fixed_kla_per_d))"]),
    ("recycle-to-nowhere", "demo", _set(["flows", "recycles", 0, "to_zone"], "Z9"),
     [E + "flows.recycles.IR.to_zone: recycle to or from no zone (got 'Z9', expected one of Z1, Z2, Z3, Z4, Z5, Z6)"]),
    ("step-feed-sum", "demo", _short_step_feed,
     [E + "flows.step_feed: step-feed fractions must sum to 1 (got 0.9, expected 1)"]),
    ("density-above-the-physical-maximum", "demo", _set(["zones:Z2", "grid", "count"], 1200),
     [E + "zones.Z2.grid.count: diffusers cover 29.3 % of the floor, more than fits "
          "(got 1200, expected <= 1022 (25 % of 163.6 m2))"]),
    ("submergence-not-below-depth", "demo", _set(["zones:Z5", "grid", "submergence_m"], 5.5),
     [E + "zones.Z5.grid.submergence_m: diffusers must be below the water surface and above the floor "
          "(got 5.5, expected < depth_m = 5.5)"]),
    ("sote-rising-with-airflow", "demo", _set(["diffuser_types", 0, "sote_points", 2, "sote_percent"], 23.5),
     [E + "diffuser_types.disc_040.sote_points[3].sote_percent: SOTE must not rise with airflow "
          "(same density and submergence) (got 23.5, expected <= 22.8)"]),
    ("headloss-points-out-of-order", "demo",
     _set(["diffuser_types", 0, "headloss_points", 2, "airflow_per_diffuser_Sm3_h"], 2.0),
     [E + "diffuser_types.disc_040.headloss_points[3].airflow_per_diffuser_Sm3_h: airflow must increase from "
          "point to point (got 2.0, expected > 3)"]),
    ("unknown-diffuser-type", "demo", _set(["zones:Z6", "grid", "type"], "disc_04"),
     [E + "zones.Z6.grid.type: no such diffuser type, did you mean 'disc_040'? "
          "(got 'disc_04', expected one of disc_040)"]),
    ("anoxic-zone-with-diffusers", "demo", _anoxic_grid,
     [E + 'zones.Z1.grid: an anoxic zone takes no air (expected no such key, or kind = "swing" for a zone that '
          'can be aerated)']),
    ("duplicate-zone-id", "demo", _set(["zones:Z3", "id"], "Z2"),
     [E + "zones[3].id: duplicate id (got 'Z2', expected ids unique within zones)"]),
    ("reserved-zone-id", "demo", _set(["zones:Z6", "id"], "clarifier"),
     [E + "zones[6].id: reserved name (got 'clarifier', expected not one of influent, clarifier, effluent, waste)"]),
    ("return-sludge-ratio-and-flow", "demo", _set(["flows", "return_sludge", "flow_m3_d"], 9000.0),
     [E + "flows.return_sludge: give either ratio or flow_m3_d for the return sludge "
          "(got 'both', expected exactly one of ratio, flow_m3_d)"]),
    ("waste-without-flow-or-srt", "demo", _set(["flows", "waste"], {}),
     [E + "flows.waste: give either srt_d or flow_m3_d for the waste sludge "
          "(got 'neither', expected exactly one of srt_d, flow_m3_d)"]),
    ("blower-below-static-head", "demo", _set(["blowers", 2, "pressure_max_gauge_kPa"], 45.0),
     [E + "blowers.B3.pressure_max_gauge_kPa: below the static head of the deepest grid (Z2, 5.2 m) "
          "(got 45.0, expected > 51.0 kPa)"]),
    ("blower-range-empty", "demo", _set(["blowers", 0, "airflow_max_Sm3_h"], 4000.0),
     [E + "blowers.B1.airflow_max_Sm3_h: must exceed airflow_min_Sm3_h (got 4000.0, expected > 4500)"]),
    ("cost-objective-without-tariff", "demo", _no_tariff,
     [E + 'operation.objective: a cost objective needs a [tariff] (got \'cost\', expected "energy", or add [tariff])']),
    ("tariff-band-not-at-midnight", "demo", _set(["tariff", "price_per_kWh", 0, 0], 1.0),
     [E + "tariff.price_per_kWh[1][1]: the first band must start at 0 h (got 1.0, expected 0)"]),
    ("per-period-list-too-short", "demo", _set(["inlet_air", "temperature_C"], [14.0] * 23),
     [E + "inlet_air.temperature_C: wrong number of values (got '23 values', expected 24 (one per period))"]),
    ("unknown-section", "demo", _rename_blowers,
     [E + "blower: unknown key, did you mean 'blowers'?",
      E + "blowers: zones have diffuser grids but there are no blowers (expected at least one [[blowers]] table)"]),
    ("zones-not-reachable", "demo", _unreachable,
     [E + "zones.Z1: zone receives no flow (not reachable from the influent) (expected a step feed, recycle or "
          "return sludge into it or a zone upstream)",
      E + "zones.Z2: zone receives no flow (not reachable from the influent) (expected a step feed, recycle or "
          "return sludge into it or a zone upstream)"]),
    ("recycle-to-itself", "demo", _set(["flows", "recycles", 0, "to_zone"], "Z6"),
     [E + "flows.recycles.IR.to_zone: recycle returns to the zone it leaves (got 'Z6', expected a zone other than "
          "from_zone)"]),
    ("nh4-above-tkn", "three", _set(["influent", "nh4_mg_L"], 50.0),
     [E + "influent.nh4_mg_L: NH4-N exceeds TKN (got 50.0, expected <= tkn_mg_L = 45)"]),
    ("fractionation-leaves-negative-xs", "three", _set(["influent", "cod_soluble_mg_L"], 400.0),
     [E + "influent.cod_soluble_mg_L: particulate COD too small for the fractionation (XS < 0) (got 400.0, "
          "expected <= cod_total_mg_L x (1 - xi_of_cod - xbh_of_cod - xba_of_cod) = 360)"]),
    ("soluble-above-total-cod", "three", _set(["influent", "cod_soluble_mg_L"], 500.0),
     [E + "influent.cod_soluble_mg_L: soluble COD exceeds total COD (got 500.0, expected <= cod_total_mg_L = 450)"]),
    ("fractions-sum-to-one-or-more", "three", _set(["influent", "fractionation"], {"si_of_cod": 0.5,
                                                                                "xi_of_cod": 0.5}),
     [E + "influent.fractionation: fractions of total COD leave nothing biodegradable (got 1.07, expected "
          "si_of_cod + xi_of_cod + xbh_of_cod + xba_of_cod < 1)"]),
    ("kinetic-override-typo", "demo", _set(["kinetics", "overrides"], {"mu_h": 5.0}),
     [E + "kinetics.overrides.mu_h: unknown key, did you mean 'mu_H'?"]),
    ("do-max-below-do-min", "demo", _set(["zones:Z6", "do_max_mg_L"], 0.8),
     [E + "zones.Z6.do_max_mg_L: must exceed the DO minimum (got 0.8, expected > 1)"]),
    ("zone-kind-word", "demo", _set(["zones:Z2", "kind"], "aerobic"),
     [E + "zones.Z2.kind: unknown value, did you mean 'aerated'? (got 'aerobic', expected one of aerated, anoxic, "
          "swing)"]),
    ("blower-efficiency-twice", "three", _set(["blowers", 0, "efficiency"], 0.6),
     [E + "blowers.PD1: give exactly one of efficiency, efficiency_points, power_points (got 'efficiency and "
          "efficiency_points', expected exactly one of the three)"]),
    ("horizon-zero-periods", "three", _set(["horizon"], {"n_periods": 0}),
     [E + "horizon.n_periods: out of range (got 0, expected >= 1 and <= 288)"]),
    ("alpha-above-one-point-two", "three", _set(["zones", 0, "alpha"], 5.0),
     [E + "zones.T1.alpha: out of range (got 5.0, expected > 0 and <= 1.2)"]),
    ("recycle-ratio-negative", "demo", _set(["flows", "recycles", 0, "ratio"], -1.0),
     [E + "flows.recycles.IR.ratio: out of range (got -1.0, expected >= 0)"]),
    ("not-a-table", "three", _set(["influent"], 3000.0),
     [E + "influent: must be a table (got 3000.0, expected a table)"]),
    ("blower-power-curve-not-convex", "demo", _set(["blowers", 0, "efficiency_points"], [
        {"airflow_Sm3_h": 4500.0, "efficiency": 0.60}, {"airflow_Sm3_h": 6500.0, "efficiency": 0.66},
        {"airflow_Sm3_h": 9000.0, "efficiency": 0.80}]),
     [E + "blowers.B1.efficiency_points: wire power rises more slowly above 6500 Sm3/h than below it (not convex: "
          "efficiency climbs too steeply there) (got [4500.0, 6500.0, 9000.0], expected wire power positive and "
          "rising at a non-falling rate (convex) over the airflow range)"]),
    ("blower-power-falls-with-airflow", "demo", _set(["blowers", 0, "efficiency_points"], [
        {"airflow_Sm3_h": 4500.0, "efficiency": 0.50}, {"airflow_Sm3_h": 6500.0, "efficiency": 0.75},
        {"airflow_Sm3_h": 9000.0, "efficiency": 0.76}]),
     [E + "blowers.B1.efficiency_points: wire power does not rise with airflow between 4500 and 6500 Sm3/h (got "
          "[4500.0, 6500.0, 9000.0], expected wire power positive and rising at a non-falling rate (convex) over "
          "the airflow range)"]),
    ("blower-out-of-service-not-boolean", "demo", _set(["blowers", 0, "out_of_service"], "yes"),
     [E + "blowers.B1.out_of_service: must be true or false (got 'yes', expected true or false)"]),
    ("blower-min-up-negative", "demo", _set(["blowers", 0, "min_up_h"], -1.0),
     [E + "blowers.B1.min_up_h: out of range (got -1.0, expected >= 0 and <= 24)"]),
    ("blower-min-down-above-a-day", "demo", _set(["blowers", 0, "min_down_h"], 30.0),
     [E + "blowers.B1.min_down_h: out of range (got 30.0, expected >= 0 and <= 24)"]),
    ("blower-starts-not-integer", "demo", _set(["blowers", 0, "max_starts_per_day"], 2.5),
     [E + "blowers.B1.max_starts_per_day: must be an integer (got 2.5, expected an integer)"]),
    ("blower-start-cost-negative", "demo", _set(["blowers", 0, "start_cost"], -3.0),
     [E + "blowers.B1.start_cost: out of range (got -3.0, expected >= 0)"]),
    ("switches-on-an-aerated-zone", "demo", _set(["zones:Z3", "max_switches_per_day"], 3),
     [E + 'zones.Z3.max_switches_per_day: only a swing zone is switched on and off (got 3, expected no such key, '
          'or kind = "swing")']),
    ("blower-range-points-pressure-falls", "demo", _set(["blowers", 0, "airflow_range_points"], [
        {"discharge_gauge_kPa": 60.0, "airflow_min_Sm3_h": 4500.0, "airflow_max_Sm3_h": 9000.0},
        {"discharge_gauge_kPa": 55.0, "airflow_min_Sm3_h": 5000.0, "airflow_max_Sm3_h": 8000.0}]),
     [E + "blowers.B1.airflow_range_points[2].discharge_gauge_kPa: pressure must increase from point to point "
          "(got 55.0, expected > 60)"]),
    ("blower-range-point-outside-the-range", "demo", _set(["blowers", 0, "airflow_range_points"], [
        {"discharge_gauge_kPa": 50.0, "airflow_min_Sm3_h": 4000.0, "airflow_max_Sm3_h": 9000.0},
        {"discharge_gauge_kPa": 70.0, "airflow_min_Sm3_h": 5000.0, "airflow_max_Sm3_h": 4800.0}]),
     [E + "blowers.B1.airflow_range_points[1]: range outside the blower's airflow_min_Sm3_h-airflow_max_Sm3_h "
          "(got '4000-9000', expected within 4500-9000)",
      E + "blowers.B1.airflow_range_points[2].airflow_max_Sm3_h: must exceed the point's airflow_min_Sm3_h "
          "(got 4800.0, expected > 5000)"]),
    ("every-blower-out-of-service", "demo", _all_out_of_service,
     [E + "blowers: every blower is out of service (got '3 out of service', expected at least one blower in "
          "service)"]),
]


@pytest.mark.parametrize("base,mutate,expected", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_invalid_layout_message(base, mutate, expected, demo_data, three_data, errors_of):
    data = demo_data if base == "demo" else three_data
    mutate(data)
    assert errors_of(data) == expected


def test_there_are_at_least_fifteen_distinct_cases():
    assert len({c[0] for c in CASES}) >= 15
    assert len({tuple(c[3]) for c in CASES}) == len(CASES)


def test_every_problem_is_listed_at_once(demo_data, errors_of):
    chosen = ["key-typo", "aerated-zone-without-diffusers", "recycle-to-nowhere", "step-feed-sum",
              "density-above-the-physical-maximum", "submergence-not-below-depth", "sote-rising-with-airflow",
              "blower-below-static-head", "tariff-band-not-at-midnight"]
    cases = [c for c in CASES if c[0] in chosen]
    for c in cases:
        c[2](demo_data)
    lines = errors_of(demo_data)
    assert sorted(lines) == sorted(line for c in cases for line in c[3])


def test_step_feed_and_recycle_problems_are_listed_together(demo_data, errors_of):
    _short_step_feed(demo_data)
    demo_data["flows"]["recycles"][0]["from_zone"] = "Z7"
    assert errors_of(demo_data) == [
        E + "flows.step_feed: step-feed fractions must sum to 1 (got 0.9, expected 1)",
        E + "flows.recycles.IR.from_zone: no such zone (got 'Z7', expected one of Z1, Z2, Z3, Z4, Z5, Z6)",
    ]


# --- files: TOML syntax, the CSV ------------------------------------------------------------------
@pytest.fixture
def plant_dir(tmp_path, layouts_dir):
    shutil.copy(layouts_dir / "demo.toml", tmp_path / "demo.toml")
    shutil.copy(layouts_dir / "demo_influent.csv", tmp_path / "demo_influent.csv")
    return tmp_path


def _load_errors(path) -> list[str]:
    with pytest.raises(InputError) as info:
        load_layout(path)
    return [str(p) for p in info.value.problems]


def test_toml_syntax_error_names_line_and_column(tmp_path):
    bad = tmp_path / "syntax.toml"
    bad.write_text('[plant]\nname = "x"\nelevation_m = = 3\n')
    assert _load_errors(bad) == [f"error: {bad}: line 3, column 15: TOML syntax: Invalid value (expected a number, "
                                 '"string", true/false, [array] or { inline table })']


def test_missing_layout_file(tmp_path):
    missing = tmp_path / "missing.toml"
    assert _load_errors(missing) == [f"error: {missing}: (file): cannot read the layout: No such file or directory"]


def _edit_csv(plant_dir, fn):
    path = plant_dir / "demo_influent.csv"
    lines = path.read_text().splitlines()
    fn(lines)
    path.write_text("\n".join(lines) + "\n")
    return os.path.join(str(plant_dir), "demo_influent.csv")


# The demo CSV: two comment lines, the header on line 3, hour 0 on line 4.
@pytest.mark.parametrize("edit,expected", [
    (lambda ls: ls.__setitem__(8, ls[8].replace("6810", "abc")),
     "row 9, column flow_m3_d: not a number (got 'abc', expected a number)"),
    (lambda ls: ls.__setitem__(8, ls[8].replace("6810", "")),
     "row 9, column flow_m3_d: empty cell (expected a number)"),
    (lambda ls: ls.__setitem__(4, ls[4].replace(",8170,", ",-8170,")),
     "row 5, column flow_m3_d: must be positive (got -8170.0, expected > 0)"),
    (lambda ls: ls.__setitem__(2, ls[2].replace("nh4_mg_L", "nh3_mg_L")),
     "row 3, column nh3_mg_L: unknown column, did you mean 'nh4_mg_L'?\n"
     "row 3: missing column nh4_mg_L (expected columns time_h, flow_m3_d, cod_total_mg_L, cod_soluble_mg_L, "
     "tkn_mg_L, nh4_mg_L, tss_mg_L, alkalinity_mol_m3)"),
    (lambda ls: ls.__setitem__(10, ls[10].replace("7,10550,453,181", "7,10550,453,481")),
     "row 11, column cod_soluble_mg_L: soluble COD exceeds total COD (got 481.0, expected <= cod_total_mg_L = 453)"),
    (lambda ls: ls.__setitem__(10, "5" + ls[10][1:]),
     "row 11, column time_h: times must increase from row to row (got 5.0, expected > 6)"),
    (lambda ls: ls.__setitem__(12, ls[12] + ",1"),
     "row 13: wrong number of fields (got 9, expected 8 (one per column))"),
    (lambda ls: ls.__setitem__(3, "0.5" + ls[3][1:]),
     "row 4, column time_h: the first row must start the day (got 0.5, expected 0)"),
])
def test_csv_problem_names_file_row_and_column(plant_dir, edit, expected):
    csv_path = _edit_csv(plant_dir, edit)
    assert _load_errors(plant_dir / "demo.toml") == [f"error: {csv_path}: {e}" for e in expected.split("\n")]


def test_csv_missing_column(plant_dir):
    def drop_alkalinity(ls):
        for i in range(2, len(ls)):
            ls[i] = ls[i].rsplit(",", 1)[0]
    csv_path = _edit_csv(plant_dir, drop_alkalinity)
    assert _load_errors(plant_dir / "demo.toml") == [
        f"error: {csv_path}: row 3: missing column alkalinity_mol_m3 (expected columns time_h, flow_m3_d, "
        "cod_total_mg_L, cod_soluble_mg_L, tkn_mg_L, nh4_mg_L, tss_mg_L, alkalinity_mol_m3)"]


def test_csv_not_found(plant_dir):
    os.remove(plant_dir / "demo_influent.csv")
    assert _load_errors(plant_dir / "demo.toml") == [
        f"error: {plant_dir / 'demo.toml'}: influent.csv: cannot read the influent CSV: No such file or directory "
        "(got 'demo_influent.csv', expected an existing file relative to the layout's folder)"]


def test_csv_influent_needs_a_folder(demo_data):
    with pytest.raises(InputError) as info:
        parse_layout(demo_data, "mem.toml", None)
    assert [str(p) for p in info.value.problems] == [
        "error: mem.toml: influent.csv: a CSV influent needs the layout's folder (got 'demo_influent.csv', "
        "expected load the layout from a file, or pass base_dir)"]


# --- unit slips: the likely cause named, as an error when surely wrong, a warning otherwise ---------
def _sote_as_fractions(d):
    for p in d["diffuser_types"][0]["sote_points"]:
        p["sote_percent"] = round(p["sote_percent"] / 100.0, 6)


def _concentrations_in_g_per_litre(d):
    for k in ("cod_total_mg_L", "cod_soluble_mg_L", "tkn_mg_L", "nh4_mg_L", "tss_mg_L"):
        d["influent"][k] = d["influent"][k] / 1000.0


def _power_points(d):
    b = d["blowers"][2]
    del b["efficiency"]
    b["power_points"] = [{"airflow_Sm3_h": 2500.0, "discharge_gauge_kPa": 60.0, "power_kW": 80.0},
                         {"airflow_Sm3_h": 5500.0, "discharge_gauge_kPa": 62.0, "power_kW": 160.0}]


def _power_points_without_elevation(d):
    _power_points(d)
    del d["plant"]["elevation_m"]


def _power_points_in_hot_water(d):
    _power_points(d)
    d["plant"]["water_temperature_C"] = 54.0


def _many_zones(d):
    z = d["zones"][0]
    d["zones"] = [dict(z, id=f"T{i}", volume_m3=10.0, grid=dict(z["grid"], count=2)) for i in range(1, 202)]


def _control_characters_in_a_key(d):
    z = _zone(d, "Z3")
    z["volume\n_m3\x1b[31m"] = z.pop("volume_m3")


# (id, base layout, mutation, the exact error lines, the exact warning lines)
SLIPS = [
    ("sote-typed-as-fractions", "demo", _sote_as_fractions,
     [E + "diffuser_types.disc_040.sote_points[1].sote_percent: SOTE 0.263 %: was it typed as a fraction? every "
          "test point is at or below 1 % (got 0.263, expected percent (26.3 %, not 0.263))"], []),
    ("elevation-typed-in-feet", "demo", _set(["plant", "elevation_m"], 2953.0),
     [], ["warning: bad.toml: plant.elevation_m: elevation 2953 m: was it typed in feet (2953 ft = 900 m)? give "
          "barometric_pressure_kPa to confirm a high site"]),
    ("depth-typed-in-mm", "demo", _set(["zones:Z2", "depth_m"], 5500.0),
     [E + "zones.Z2.grid.count: diffusers cover 19555.6 % of the floor, more than fits (got 800, expected <= 1 "
          "(25 % of 0.2 m2))"],
     ["warning: bad.toml: zones.Z2.grid.submergence_m: grid sits 5494.80 m above the floor",
      "warning: bad.toml: zones.Z2.depth_m: side-water depth 5500 m: was it typed in mm (5.5 m)?"]),
    ("concentrations-in-g-per-litre", "three", _concentrations_in_g_per_litre,
     [E + "influent.cod_total_mg_L: total COD at most 0.45 mg/L in every row: were the concentrations typed in "
          "g/L? (got 0.45, expected mg/L (x 1000: 450 mg/L))"], []),
    ("alkalinity-as-caco3", "three", _set(["influent", "alkalinity_mol_m3"], 325.0),
     [], ["warning: bad.toml: influent.alkalinity_mol_m3: alkalinity 325 mol/m3: was it given in mg/L as CaCO3 "
          "(6.5 mol/m3)?"]),
    ("huge-growth-rate", "demo", _set(["kinetics", "overrides"], {"mu_H": 6.0e5}),
     [E + "kinetics.overrides.mu_H: out of range (got 600000.0, expected > 0 and <= 20)"], []),
    ("twenty-digit-integer-shown-rounded", "demo", _set(["plant", "elevation_m"], 12345678901234567890),
     [E + "plant.elevation_m: out of range (got 1.23456e+19, expected >= -500 and <= 6000)"], []),
    ("integer-beyond-the-float-range", "demo", _set(["plant", "elevation_m"], 10**400),
     [E + "plant.elevation_m: number too large (got 1e+400, expected >= -500 and <= 6000)"], []),
    ("power-points-without-elevation", "demo", _power_points_without_elevation,
     [E + "plant.elevation_m: missing required key (expected a number)"], []),
    ("power-points-in-water-at-54-C", "demo", _power_points_in_hot_water,
     [E + "plant.water_temperature_C: out of range (got 54.0, expected >= 0 and <= 45)"], []),
    ("two-hundred-zones", "three", _many_zones,
     [E + "zones: too many zones for one train (got '201 zones', expected at most 60 (model a long plug-flow "
          "lane with fewer, larger zones))"], None),
    ("control-characters-in-a-key", "demo", _control_characters_in_a_key,
     [E + "zones.Z3.volume_m3: missing required key (expected a number)",
      E + "zones.Z3.\"volume\\n_m3\\x1b[31m\": unknown key, did you mean 'volume_m3'?"], []),
]


@pytest.mark.parametrize("base,mutate,errors,warnings", [c[1:] for c in SLIPS], ids=[c[0] for c in SLIPS])
def test_unit_slip_names_its_likely_cause(base, mutate, errors, warnings, demo_data, three_data):
    data = demo_data if base == "demo" else three_data
    mutate(data)
    found: list = []
    if errors:
        with pytest.raises(InputError) as info:
            parse_layout(data, "bad.toml", os.path.join(os.path.dirname(__file__), "..", "..", "layouts"),
                         warnings=found)
        assert [str(p) for p in info.value.problems] == errors
        assert [str(w) for w in info.value.warnings] == [str(w) for w in found]
    else:
        parse_layout(data, "bad.toml", os.path.join(os.path.dirname(__file__), "..", "..", "layouts"), warnings=found)
    if warnings is not None:
        assert [str(w) for w in found] == warnings
    for line in (errors or []) + [str(w) for w in found]:
        assert line.isprintable(), line  # one clean line: control characters escaped


def test_power_points_layout_parses_with_its_site(demo_data):
    _power_points(demo_data)
    layout = parse_layout(demo_data, "ok.toml", os.path.join(os.path.dirname(__file__), "..", "..", "layouts"))
    assert all(0.0 < p.efficiency <= 1.0 for p in layout.blowers[2].efficiency_points)


def test_csv_concentrations_in_g_per_litre_name_the_csv_row(plant_dir):
    def to_grams(ls):
        for i in range(3, len(ls)):
            cells = ls[i].split(",")
            ls[i] = ",".join(cells[:2] + [f"{float(c) / 1000:g}" for c in cells[2:7]] + cells[7:])
    csv_path = _edit_csv(plant_dir, to_grams)
    assert _load_errors(plant_dir / "demo.toml") == [
        f"error: {csv_path}: row 15, column cod_total_mg_L: total COD at most 0.538 mg/L in every row: were the "
        "concentrations typed in g/L? (got 0.538, expected mg/L (x 1000: 538 mg/L))"]


def test_csv_header_with_control_characters_stays_one_line(plant_dir):
    csv_path = _edit_csv(plant_dir, lambda ls: ls.__setitem__(2, ls[2].replace("nh4_mg_L", "nh4\x1b_mg\x07L")))
    lines = _load_errors(plant_dir / "demo.toml")
    assert lines[0] == (f"error: {csv_path}: row 3, column 'nh4\\x1b_mg\\x07L': unknown column, did you mean "
                        "'nh4_mg_L'?")
    assert all(line.isprintable() for line in lines)


def test_csv_cod_outside_the_usual_range_is_named_by_file_and_row(plant_dir):
    # line 8 of the demo CSV is hour 4: 4,6470,408,163,...
    csv_path = _edit_csv(plant_dir, lambda ls: ls.__setitem__(7, ls[7].replace(",408,163,", ",2408,163,")))
    found: list = []
    load_layout(plant_dir / "demo.toml", warnings=found)
    assert [str(w) for w in found] == [f"warning: {csv_path}: row 8, column cod_total_mg_L: unusual total COD "
                                       "2408 mg/L (usual 50-2000)"]


@pytest.mark.parametrize("special", ["/dev/zero", "/dev/null"])
def test_device_given_as_layout_or_influent_is_refused_at_once(plant_dir, special):
    assert _load_errors(special) == [f"error: {special}: (file): cannot read the layout: not a regular file "
                                     "(got 'a character device', expected a regular file)"]
    text = (plant_dir / "demo.toml").read_text().replace('csv = "demo_influent.csv"', f'csv = "{special}"')
    (plant_dir / "demo.toml").write_text(text)
    assert _load_errors(plant_dir / "demo.toml") == [
        f"error: {special}: (file): cannot read the influent CSV: not a regular file (got 'a character device', "
        "expected a regular file)"]


def test_csv_header_cell_with_a_colon_is_quoted(plant_dir):
    csv_path = _edit_csv(plant_dir, lambda ls: ls.__setitem__(2, ls[2].replace("tss_mg_L", ":")))
    assert _load_errors(plant_dir / "demo.toml")[0] == (
        f"error: {csv_path}: row 3, column ':': unknown column (expected one of time_h, flow_m3_d, cod_total_mg_L, "
        "cod_soluble_mg_L, tkn_mg_L, nh4_mg_L, tss_mg_L, alkalinity_mol_m3)")


def test_folder_given_as_layout(tmp_path):
    assert _load_errors(tmp_path) == [f"error: {tmp_path}: (file): cannot read the layout: it is a folder "
                                      "(expected a file)"]


def test_deeply_nested_arrays_are_an_input_error(tmp_path):
    deep = tmp_path / "deep.toml"
    deep.write_text("a = " + "[" * 2000 + "]" * 2000 + "\n")
    assert _load_errors(deep) == [f"error: {deep}: (toml): TOML nested too deeply (expected arrays and inline "
                                  "tables nested a few levels at most)"]


def test_csv_flow_warnings_name_the_csv(plant_dir):
    def tiny_flows(ls):
        for i in range(3, len(ls)):
            cells = ls[i].split(",")
            ls[i] = ",".join([cells[0], f"{float(cells[1]) / 10000:g}"] + cells[2:])
    csv_path = _edit_csv(plant_dir, tiny_flows)
    found: list = []
    load_layout(plant_dir / "demo.toml", warnings=found)
    lines = [str(w) for w in found]
    assert f"warning: {csv_path}: column flow_m3_d: unusual mean influent flow 1.20004 m3/d" in lines


def test_pipe_given_as_layout_is_refused_without_waiting(tmp_path):
    fifo = tmp_path / "plant.toml"
    os.mkfifo(fifo)  # opening it would wait for a writer forever
    assert _load_errors(fifo) == [f"error: {fifo}: (file): cannot read the layout: not a regular file (got 'a pipe', "
                                  "expected a regular file)"]


def test_an_empty_blowers_list_is_no_blowers(demo_data, errors_of):
    # found by the parser fuzz: `blowers = []` parsed, but its dump (no blowers key) did not
    demo_data["blowers"] = []
    assert errors_of(demo_data) == [
        "error: bad.toml: blowers: zones have diffuser grids but there are no blowers (expected at least one "
        "[[blowers]] table)"]
