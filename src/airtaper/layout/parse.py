"""Layout files (TOML) to the validated :class:`~airtaper.layout.types.Layout`.

:func:`load_layout` reads the file and the influent CSV it names;
:func:`parse_layout` does the same for a dict already in memory. Both collect
every problem before raising one :class:`~airtaper.errors.InputError`, and put
warnings (suspicious magnitudes) in the ``warnings`` list when one is given.
docs/layout-format.md describes every key.
"""

from __future__ import annotations

import os
import re
import tomllib

from airtaper import units
from airtaper.errors import InputError, Problem
from airtaper.layout import defaults as D
from airtaper.layout import graph
from airtaper.layout.influent import csv_display_path, read_day_influent, read_influent
from airtaper.physics.blower import efficiency_from_power, equivalent_curve, power_curve_problems
from airtaper.layout.reader import (
    Collector, LayoutWarning, Table, UnreadableInput, check_number, did_you_mean, fixed, is_number, read_input_file,
    valid_id,
)
from airtaper.layout.types import (
    Blower, Capital, Clarifier, DiffuserGrid, DiffuserType, EfficiencyPoint, Header, HeadlossPoint,
    DayZoneDO, Horizon, Influent, InletAir, Kinetics, Layout, Limits, LoadDay, Operation, Plant, PowerPoint, Recycle, ReturnSludge, Settling,
    SotePoint, StepFeed, Tariff, Wasting, Zone,
    RangePoint,
)

ZONE_KINDS = ("aerated", "anoxic", "swing")
#: Words engineers use for a zone kind, for the "did you mean" hint.
ZONE_KIND_SYNONYMS = {"aerobic": "aerated", "oxic": "aerated", "aeration": "aerated",
                      "unaerated": "anoxic", "switch": "swing", "swing zone": "swing"}
CLARIFIER_KINDS = ("ideal", "layered")
OBJECTIVES = ("energy", "cost")
MAX_LAYOUT_BYTES = 5_000_000


# --------------------------------------------------------------------------- entry points
def load_layout(path, warnings: list | None = None) -> Layout:
    """Read and validate a layout file (and the influent CSV it names).

    Parameters
    ----------
    path : str or os.PathLike
        The TOML file. A CSV it names is read relative to the file's folder.
    warnings : list, optional
        Receives one :class:`LayoutWarning` per suspicious value.

    Raises
    ------
    InputError
        Listing every problem found in the file and its CSV.
    """
    label = os.fspath(path)
    if not isinstance(label, str):
        label = os.fsdecode(label)
    try:
        raw = read_input_file(label, MAX_LAYOUT_BYTES, "the layout")
    except UnreadableInput as exc:
        raise InputError(Problem(label, "(file)", exc.problem, exc.got, exc.expected)) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(Problem(label, "(file)", "not UTF-8 text", f"byte {exc.start}", "a UTF-8 TOML file")) \
            from None
    data = parse_toml_text(text, label)
    return parse_layout(data, label, os.path.dirname(os.path.abspath(label)), warnings=warnings)


_TOML_AT = re.compile(r"\s*\(at line (\d+), column (\d+)\)\s*$")


def parse_toml_text(text: str, label: str = "<memory>") -> dict:
    """TOML text to a dict; a syntax error becomes an InputError naming line and column."""
    try:
        return tomllib.loads(text)
    except RecursionError:  # tomllib recurses once per level of nested arrays or inline tables
        raise InputError(Problem(label, "(toml)", "TOML nested too deeply", None,
                                 "arrays and inline tables nested a few levels at most")) from None
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = _TOML_AT.search(msg)
        if m:
            key, msg = f"line {m.group(1)}, column {m.group(2)}", msg[:m.start()]
        elif msg.endswith("(at end of document)"):
            key, msg = "end of file", msg[: -len("(at end of document)")].rstrip()
        else:
            key = "(toml)"
        raise InputError(Problem(label, key, f"TOML syntax: {msg}", None, _toml_expected(msg))) from None


def _toml_expected(message: str) -> str:
    """What a TOML syntax error calls for, in words (tomllib's messages say what is wrong, not what is right)."""
    text = message.lower()
    if "overwrite" in text or "twice" in text or "redefin" in text:
        return "each key and each table once"
    if "unclosed" in text or "end of" in text:
        return "every string, array and table closed"
    if "invalid value" in text:
        return 'a number, "string", true/false, [array] or { inline table }'
    return "TOML syntax (https://toml.io; quote text, one key = value per line)"


def parse_layout(data: dict, path: str = "<memory>", base_dir=None, warnings: list | None = None) -> Layout:
    """Validate a layout given as a dict (as tomllib returns it).

    ``path`` labels the messages; ``base_dir`` is the folder an influent CSV is
    read from (None: a CSV influent is an error). See :func:`load_layout`.
    """
    col = Collector(str(path))
    base = None if base_dir is None else os.fspath(base_dir)
    layout = None
    if not isinstance(data, dict):
        col.error("(file)", "must be a TOML table", type(data).__name__, "a table of sections")
    else:
        layout = _Parser(col, data, base).run()
    if warnings is not None:
        warnings.extend(col.warnings)
    if col.problems:
        raise InputError(col.problems, col.warnings)
    assert layout is not None
    return layout


# --------------------------------------------------------------------------- the parser
class _Parser:
    def __init__(self, col: Collector, data: dict, base_dir: str | None):
        self.col = col
        self.root = Table(col, data, "")
        self.base_dir = base_dir

    # -- helpers ---------------------------------------------------------------
    def section(self, t: Table | None, fn, *args):
        """Run ``fn(t, ...)``; return its value, or None when it recorded a problem."""
        before = self.col.count
        value = fn(t, *args)
        if t is not None:
            t.finish()
        return None if self.col.count > before else value

    def _items_of(self, arr, name: str, id_default=None, reserved=()):
        out = []
        if arr is None:
            return out
        seen: set[str] = set()
        for i, d in enumerate(arr, start=1):
            raw_id = d.get("id", id_default(i) if id_default else None)
            ident = None
            if raw_id is None:
                self.col.error(f"{name}[{i}].id", "missing required key", None, "an identifier")
            else:
                ident = valid_id(self.col, f"{name}[{i}].id", raw_id, reserved)
                if ident is not None and ident in seen:
                    self.col.error(f"{name}[{i}].id", "duplicate id", ident, "ids unique within " + name)
                    ident = None
            if ident is not None:
                seen.add(ident)
            key = f"{name}.{ident}" if ident is not None else f"{name}[{i}]"
            t = Table(self.col, d, key)
            t.allow("id")
            out.append((t, ident))
        return out

    # -- the whole file --------------------------------------------------------
    def run(self) -> Layout | None:
        root, col = self.root, self.col
        notes = root.string("notes", "")
        horizon = self.section(root.table("horizon"), self.horizon)
        n = horizon.n_periods if horizon is not None else D.N_PERIODS
        self.n = n
        plant = self.section(root.table("plant", required=True), self.plant)
        types = self.diffuser_types()
        limits_t = root.table("limits")
        limits = self.section(limits_t, self.limits)
        self.do_min_default = D.DO_MIN_mg_L
        if limits_t is not None and is_number(limits_t.data.get("do_min_mg_L")):
            self.do_min_default = float(limits_t.data["do_min_mg_L"])
        zone_defaults = self.section(root.table("zone_defaults"), self.zone_defaults) or self._zone_default_values()
        zones, zone_ids = self.zones(zone_defaults, types)
        clarifier = self.section(root.table("clarifier"), self.clarifier)
        tss_per_cod = clarifier.tss_per_cod if clarifier is not None else D.TSS_PER_COD
        kinetics = self.section(root.table("kinetics"), self.kinetics)
        n_content = D.DISPLAY_N_CONTENT[kinetics.parameter_set] if kinetics else D.DISPLAY_N_CONTENT[D.PARAMETER_SET]
        if kinetics is not None:
            ov = dict(kinetics.overrides)
            n_content = (ov.get("i_XB", n_content[0]), ov.get("i_XP", n_content[1]))
        influent_t = root.table("influent", required=True)
        influent = (read_influent(influent_t, n, self.base_dir, tss_per_cod, n_content)
                    if influent_t is not None else None)
        flows = self.flows(zone_ids, influent)
        inlet = self.section(root.table("inlet_air"), self.inlet_air)
        self.air_conditions = _duty_point_conditions(plant, inlet)
        blowers = self.blowers()
        header = self.section(root.table("header"), self.header, blowers)
        tariff = self.section(root.table("tariff"), self.tariff)
        operation = self.section(root.table("operation"), self.operation, "tariff" in root.data)
        capital = self.section(root.table("capital"), self.capital, "tariff" in root.data)
        load_days = self.load_days(plant, zones, influent, flows, limits)
        root.finish()

        valid_zones = [z for z in zones if z is not None]
        self.cross_checks(plant, valid_zones, len(zones), types, blowers, header, influent, flows, limits)
        if col.problems:
            return None
        step_feed, recycles, ras, wasting = flows
        return Layout(
            path=col.file, plant=plant, zones=tuple(zones), diffuser_types=tuple(types.values()),
            step_feed=tuple(step_feed), recycles=tuple(recycles), return_sludge=ras, wasting=wasting,
            clarifier=clarifier, blowers=tuple(blowers), header=header, inlet_air=inlet, influent=influent,
            limits=limits, tariff=tariff, horizon=horizon, kinetics=kinetics, operation=operation, notes=notes,
            load_days=load_days, capital=capital,
        )

    # -- sections ----------------------------------------------------------------
    def horizon(self, t: Table | None) -> Horizon:
        if t is None:
            return Horizon(D.N_PERIODS, units.HOURS_PER_DAY / D.N_PERIODS, D.STEPS_PER_PERIOD)
        n = t.integer("n_periods", D.N_PERIODS, ge=1, le=288)
        steps = t.integer("steps_per_period", D.STEPS_PER_PERIOD, ge=1, le=60)
        return Horizon(n, units.HOURS_PER_DAY / n, steps) if n is not None else None

    def plant(self, t: Table | None) -> Plant | None:
        if t is None:
            return None  # the missing section is already reported
        name = t.string("name")
        if isinstance(name, str) and not name.strip():
            self.col.error(t.key("name"), "must not be empty", name, "the plant's name")
        elevation = t.number("elevation_m", ge=-500.0, le=6000.0)
        temp = t.per_period("water_temperature_C", self.n, ge=0.0, le=45.0)
        baro = t.number("barometric_pressure_kPa", None, ge=50.0, le=110.0)
        salinity = t.number("salinity_g_kg", D.SALINITY_g_kg, ge=0.0, le=45.0)
        if elevation is not None and baro is None and elevation > D.WARN_ELEVATION_FEET_m:
            self.col.warn(t.key("elevation_m"), f"elevation {elevation:g} m: was it typed in feet "
                                                f"({elevation:g} ft = {units.ft_to_m(elevation):.0f} m)? "
                                                "give barometric_pressure_kPa to confirm a high site")
        elif elevation is not None and not (D.WARN_ELEVATION_m[0] <= elevation <= D.WARN_ELEVATION_m[1]):
            self.col.warn(t.key("elevation_m"), f"unusual elevation {elevation:g} m")
        if temp is not None:
            lo, hi = D.WARN_WATER_TEMPERATURE_C
            odd = [x for x in temp if not lo <= x <= hi]
            if odd:
                self.col.warn(t.key("water_temperature_C"),
                              f"water temperature {odd[0]:g} C is outside the usual {lo:g}-{hi:g} C")
        return Plant(name, elevation, temp, baro, salinity)

    def diffuser_types(self) -> dict[str, DiffuserType]:
        out: dict[str, DiffuserType] = {}
        self.declared_types: set[str] = set()
        self.membrane_areas: dict[str, float] = {}
        for t, ident in self._items_of(self.root.array("diffuser_types"), "diffuser_types"):
            if ident is not None:
                self.declared_types.add(ident)
            dt = self.section(t, self.diffuser_type, ident)
            if dt is not None and ident is not None:
                out[ident] = dt
        return out

    def diffuser_type(self, t: Table, ident) -> DiffuserType:
        col = self.col
        area = t.number("membrane_area_m2", gt=0.0, le=5.0)
        if area is not None and ident is not None:
            self.membrane_areas[ident] = area  # for density checks even if the rest of the type is wrong
        qmin = t.number("airflow_min_Sm3_h", ge=0.0)
        qmax = t.number("airflow_max_Sm3_h", gt=0.0)
        de = t.number("effective_depth_fraction", D.EFFECTIVE_DEPTH_FRACTION, gt=0.0, lt=1.0)
        if qmin is not None and qmax is not None and qmax <= qmin:
            col.error(t.key("airflow_max_Sm3_h"), "must exceed airflow_min_Sm3_h", qmax, f"> {qmin:g}")
        sote = self._points(t, "sote_points", {
            "airflow_per_diffuser_Sm3_h": {"gt": 0.0}, "sote_percent": {"gt": 0.0, "lt": 100.0},
            "density_percent": {"gt": 0.0, "le": 100.0}, "submergence_m": {"gt": 0.0, "le": 50.0}}, SotePoint)
        head = self._points(t, "headloss_points", {
            "airflow_per_diffuser_Sm3_h": {"ge": 0.0}, "headloss_kPa": {"gt": 0.0, "le": 100.0}}, HeadlossPoint)
        if sote is not None and max(p.sote_percent for p in sote) <= D.SOTE_FRACTION_MAX_percent:
            first = sote[0].sote_percent
            col.error(f"{t.key('sote_points')}[1].sote_percent",
                      f"SOTE {first:g} %: was it typed as a fraction? every test point is at or below "
                      f"{D.SOTE_FRACTION_MAX_percent:g} %", first, f"percent ({100 * first:g} %, not {first:g})")
        elif sote is not None:
            self._check_sote(t, sote)
            for i, pt in enumerate(sote, start=1):
                k = f"{t.key('sote_points')}[{i}]"
                if pt.density_percent <= D.SOTE_FRACTION_MAX_percent:
                    col.warn(f"{k}.density_percent", f"density {pt.density_percent:g} %: was it typed as a fraction "
                                                     f"({100 * pt.density_percent:g} %)?")
                if pt.submergence_m < D.WARN_TEST_SUBMERGENCE_MIN_m:
                    col.warn(f"{k}.submergence_m", f"test submergence {pt.submergence_m:g} m is unusually shallow "
                                                   "(was it in another unit?)")
        if head is not None:
            for i in range(1, len(head)):
                k = f"{t.key('headloss_points')}[{i + 1}]"
                if head[i].airflow_per_diffuser_Sm3_h <= head[i - 1].airflow_per_diffuser_Sm3_h:
                    col.error(f"{k}.airflow_per_diffuser_Sm3_h", "airflow must increase from point to point",
                              head[i].airflow_per_diffuser_Sm3_h, f"> {head[i - 1].airflow_per_diffuser_Sm3_h:g}")
                elif head[i].headloss_kPa < head[i - 1].headloss_kPa:
                    col.error(f"{k}.headloss_kPa", "headloss must not fall as airflow rises",
                              head[i].headloss_kPa, f">= {head[i - 1].headloss_kPa:g}")
        if sote is not None and qmin is not None and qmax is not None and qmax > qmin:
            tested = [p.airflow_per_diffuser_Sm3_h for p in sote]
            if qmin < min(tested) or qmax > max(tested):
                col.warn(t.key("sote_points"), f"test points cover {min(tested):g}-{max(tested):g} Sm3/h per "
                                               f"diffuser but the range is {qmin:g}-{qmax:g}: SOTE is extrapolated")
        return DiffuserType(ident, area, qmin, qmax, sote, head, de)

    def _points(self, t: Table, name: str, spec: dict, cls, min_points: int = 2):
        arr = t.array(name, required=True)
        if arr is None:
            return None
        if len(arr) < min_points:
            self.col.error(t.key(name), "too few points", len(arr), f"at least {min_points}")
            return None
        out = []
        before = self.col.count
        for i, d in enumerate(arr, start=1):
            pt = Table(self.col, d, f"{t.key(name)}[{i}]")
            vals = {k: pt.number(k, **b) for k, b in spec.items()}
            pt.finish()
            out.append(vals)
        if self.col.count > before:
            return None
        return tuple(cls(**v) for v in out)

    def _check_sote(self, t: Table, pts: tuple[SotePoint, ...]) -> None:
        groups: dict[tuple[float, float], list[tuple[int, SotePoint]]] = {}
        for i, p in enumerate(pts, start=1):
            groups.setdefault((p.density_percent, p.submergence_m), []).append((i, p))
        for members in groups.values():
            for (_, a), (j, b) in zip(members, members[1:]):
                k = f"{t.key('sote_points')}[{j}]"
                if b.airflow_per_diffuser_Sm3_h <= a.airflow_per_diffuser_Sm3_h:
                    self.col.error(f"{k}.airflow_per_diffuser_Sm3_h",
                                   "airflow must increase from point to point at the same density and submergence",
                                   b.airflow_per_diffuser_Sm3_h, f"> {a.airflow_per_diffuser_Sm3_h:g}")
                elif b.sote_percent > a.sote_percent:
                    self.col.error(f"{k}.sote_percent", "SOTE must not rise with airflow (same density and "
                                   "submergence)", b.sote_percent, f"<= {a.sote_percent:g}")
        if len({p.airflow_per_diffuser_Sm3_h for p in pts}) < 2:
            self.col.error(t.key("sote_points"), "test points need at least two airflows", None,
                           "points at two or more airflows per diffuser")

    def limits(self, t: Table | None) -> Limits:
        if t is None:
            self.col.warn("limits", "no effluent NH4-N limit: an optimisation is bounded only by the DO minimum")
            return Limits(None, None, None)
        mean = t.number("nh4_mean_mg_L", None, gt=0.0)
        peak = t.number("nh4_max_mg_L", None, gt=0.0)
        tn = t.number("tn_mean_mg_L", None, gt=0.0)
        t.number("do_min_mg_L", D.DO_MIN_mg_L, ge=0.0, le=20.0)
        if mean is not None and peak is not None and peak < mean:
            self.col.error(t.key("nh4_max_mg_L"), "the maximum period mean must not be below the daily mean",
                           peak, f">= nh4_mean_mg_L = {mean:g}")
        if mean is None and peak is None and "nh4_mean_mg_L" not in t.data and "nh4_max_mg_L" not in t.data:
            self.col.warn("limits", "no effluent NH4-N limit: an optimisation is bounded only by the DO minimum")
        return Limits(mean, peak, tn)

    def _zone_default_values(self) -> dict:
        return {"alpha": D.ALPHA, "beta": D.BETA, "fouling": D.FOULING,
                "mixing_airflow_min_Sm3_h_m2": D.MIXING_AIRFLOW_MIN_Sm3_h_m2,
                "drop_leg_k_kPa_per_Sm3_h2": D.DROP_LEG_K_kPa_per_Sm3_h2}

    def zone_defaults(self, t: Table | None) -> dict:
        base = self._zone_default_values()
        if t is None:
            return base
        out = {}
        for k, v in base.items():
            out[k] = t.number(k, v, **_ZONE_NUMBER_BOUNDS[k])
        return out

    def zones(self, zd: dict, types: dict) -> tuple[list, list[str]]:
        arr = self.root.array("zones", required=True)
        if arr is not None and not arr:
            self.col.error("zones", "no zones", None, "at least one [[zones]] table")
        items = self._items_of(arr, "zones", reserved=graph.RESERVED_NODES)
        zones, ids = [], []
        for t, ident in items:
            zones.append(self.section(t, self.zone, ident, zd, types))
            if ident is not None:
                ids.append(ident)
        if len(items) > D.MAX_ZONES:
            self.col.error("zones", "too many zones for one train", f"{len(items)} zones",
                           f"at most {D.MAX_ZONES} (model a long plug-flow lane with fewer, larger zones)")
        if len(ids) != len(items):
            ids = []  # ids unknown: skip the train checks rather than misreport them
        return zones, ids

    def zone(self, t: Table, ident, zd: dict, types: dict) -> Zone:
        col = self.col
        kind = t.string("kind", choices=ZONE_KINDS, synonyms=ZONE_KIND_SYNONYMS)
        volume = t.number("volume_m3", gt=0.0)
        depth = t.number("depth_m", gt=0.0)
        area = t.number("area_m2", None, gt=0.0)
        do_min = t.number("do_min_mg_L", None, ge=0.0, le=20.0)
        do_max = t.number("do_max_mg_L", None, gt=0.0, le=20.0)
        vals = {k: t.number(k, zd[k], **_ZONE_NUMBER_BOUNDS[k]) for k in zd}
        valve = t.number("valve_capacity_Sm3_h", None, gt=0.0)
        kla = t.number("fixed_kla_per_d", None, gt=0.0, le=5000.0)
        do_sat = t.number("fixed_do_sat_mg_L", None, gt=0.0, le=60.0)
        switches = t.integer("max_switches_per_day", None, ge=0, le=1000)
        if switches is not None and kind != "swing":
            col.error(t.key("max_switches_per_day"), "only a swing zone is switched on and off", switches,
                      'no such key, or kind = "swing"')
        grid_t = t.table("grid")
        grid = self.section(grid_t, self.grid, depth, types) if grid_t is not None else None
        if kind == "anoxic":
            for k in ("do_min_mg_L", "do_max_mg_L", "grid", "fixed_kla_per_d", "fixed_do_sat_mg_L",
                      "valve_capacity_Sm3_h"):
                if k in t.data:
                    col.error(t.key(k), "an anoxic zone takes no air", None,
                              'no such key, or kind = "swing" for a zone that can be aerated')
        elif kind in ("aerated", "swing"):
            if do_min is None and "do_min_mg_L" not in t.data:  # a swing zone holds it while aerated
                do_min = self.do_min_default
            has_grid = "grid" in t.data
            if not has_grid and kla is None and "fixed_kla_per_d" not in t.data:
                if kind == "aerated":
                    col.error(t.key("grid"), "aerated zone has no diffusers", None,
                              "a [zones.grid] table (or fixed_kla_per_d)")
                else:
                    col.warn(t.key("grid"), "swing zone has no diffusers and can never be aerated")
            if has_grid and "fixed_kla_per_d" in t.data:
                col.error(t.key("fixed_kla_per_d"), "a zone has either a diffuser grid or a fixed kLa", None,
                          "grid or fixed_kla_per_d, not both")
        if "fixed_do_sat_mg_L" in t.data and "fixed_kla_per_d" not in t.data:
            col.error(t.key("fixed_do_sat_mg_L"), "only with fixed_kla_per_d", None, "fixed_kla_per_d as well")
        if do_min is not None and do_max is not None and do_max <= do_min:
            col.error(t.key("do_max_mg_L"), "must exceed the DO minimum", do_max, f"> {do_min:g}")
        if volume is not None and depth is not None:
            derived = volume / depth
            if area is None:
                area = derived
            elif abs(area - derived) > D.WARN_AREA_MISMATCH * derived:
                col.warn(t.key("area_m2"), f"floor area {area:g} m2 differs from volume_m3 / depth_m = "
                                           f"{fixed(derived, 1)} m2 by more than {100 * D.WARN_AREA_MISMATCH:g} %")
        if kind == "anoxic":
            do_min = do_max = None
        return Zone(ident, kind, volume, depth, area, do_min, do_max, vals["alpha"], vals["fouling"], vals["beta"],
                    grid, valve, vals["drop_leg_k_kPa_per_Sm3_h2"], vals["mixing_airflow_min_Sm3_h_m2"], kla, do_sat,
                    switches if kind == "swing" else None)

    def grid(self, t: Table, depth, types: dict) -> DiffuserGrid:
        type_id = t.string("type")
        count = t.integer("count", ge=1, le=10_000_000)
        sub = t.number("submergence_m", gt=0.0)
        step = t.integer("count_step", D.GRID_COUNT_STEP, ge=1, le=10_000_000)
        if isinstance(type_id, str) and type_id not in self.declared_types:
            hint = did_you_mean(type_id, sorted(self.declared_types))
            problem = f"no such diffuser type, did you mean {hint!r}?" if hint else "no such diffuser type"
            self.col.error(t.key("type"), problem, type_id,
                           ("one of " + ", ".join(sorted(self.declared_types))) if self.declared_types
                           else "an id from [[diffuser_types]]")
        if sub is not None and depth is not None and sub >= depth:
            self.col.error(t.key("submergence_m"), "diffusers must be below the water surface and above the floor",
                           sub, f"< depth_m = {depth:g}")
        elif sub is not None and depth is not None and depth - sub > D.WARN_GRID_ABOVE_FLOOR_m:
            self.col.warn(t.key("submergence_m"), f"grid sits {fixed(depth - sub, 2)} m above the floor")
        return DiffuserGrid(type_id, count, sub, step)

    def clarifier(self, t: Table | None) -> Clarifier:
        if t is None:
            return Clarifier("ideal", D.EFFLUENT_TSS_mg_L, None, None, D.CLARIFIER_LAYERS,
                             D.feed_layer(D.CLARIFIER_LAYERS), None, D.TSS_PER_COD)
        kind = t.string("kind", "ideal", choices=CLARIFIER_KINDS)
        tss_per_cod = t.number("tss_per_cod", D.TSS_PER_COD, gt=0.0, le=2.0)
        layered_keys = ("area_m2", "height_m", "layers", "feed_layer", "settling")
        if kind == "layered":
            t.allow("effluent_tss_mg_L")
            if "effluent_tss_mg_L" in t.data:
                self.col.error(t.key("effluent_tss_mg_L"), 'applies only to kind = "ideal"', None,
                               "no such key (the layered settler computes its effluent)")
            area = t.number("area_m2", gt=0.0)
            height = t.number("height_m", gt=0.0, le=20.0)
            layers = t.integer("layers", D.CLARIFIER_LAYERS, ge=3, le=100)
            feed = t.integer("feed_layer", D.feed_layer(layers) if layers else None, ge=2)
            if feed is not None and layers is not None and feed >= layers:
                self.col.error(t.key("feed_layer"), "feed must be above the bottom layer", feed, f"< layers = {layers}")
            settling = self.section(t.table("settling"), self.settling)
            return Clarifier("layered", 0.0, area, height, layers, feed, settling, tss_per_cod)
        t.allow(*layered_keys)
        for k in layered_keys:
            if k in t.data:
                self.col.error(t.key(k), 'applies only to kind = "layered"', None, "no such key for an ideal clarifier")
        tss = t.number("effluent_tss_mg_L", D.EFFLUENT_TSS_mg_L, ge=0.0, le=1000.0)
        return Clarifier("ideal", tss, None, None, D.CLARIFIER_LAYERS, D.feed_layer(D.CLARIFIER_LAYERS), None,
                         tss_per_cod)

    def settling(self, t: Table | None) -> Settling:
        if t is None:
            return Settling(D.SETTLING_V0_MAX_m_d, D.SETTLING_V0_m_d, D.SETTLING_RH_m3_g, D.SETTLING_RP_m3_g,
                            D.SETTLING_FNS, D.SETTLING_X_THRESHOLD_g_m3)
        return Settling(
            t.number("v0_max_m_d", D.SETTLING_V0_MAX_m_d, gt=0.0),
            t.number("v0_m_d", D.SETTLING_V0_m_d, gt=0.0),
            t.number("rh_m3_g", D.SETTLING_RH_m3_g, gt=0.0),
            t.number("rp_m3_g", D.SETTLING_RP_m3_g, gt=0.0),
            t.number("fns", D.SETTLING_FNS, ge=0.0, lt=1.0),
            t.number("x_threshold_g_m3", D.SETTLING_X_THRESHOLD_g_m3, ge=0.0),
        )

    # -- flows -------------------------------------------------------------------
    def flows(self, zone_ids: list[str], influent: Influent | None):
        col, n = self.col, self.n
        before = col.count
        t = self.root.table("flows", required=True)
        known = influent is not None
        self.flows_known = known
        q = influent.flow_m3_d if known else tuple(1.0 for _ in range(n))
        first = zone_ids[0] if zone_ids else None
        step_feed: list[StepFeed] = []
        recycles: list[Recycle] = []
        ras = wasting = None
        if t is not None:
            arr = t.array("step_feed")
            if arr is None and "step_feed" not in t.data:
                if first is not None:
                    step_feed = [StepFeed(first, 1.0)]
            elif arr is not None:
                if not arr:
                    col.error(t.key("step_feed"), "empty", None, "at least one [[flows.step_feed]] table")
                for i, d in enumerate(arr, start=1):
                    st = Table(col, d, f"{t.key('step_feed')}[{i}]")
                    zone = st.string("zone")
                    frac = st.number("fraction", ge=0.0, le=1.0)
                    st.finish()
                    if zone is not None and frac is not None:
                        step_feed.append(StepFeed(zone, frac))
            rec_arr = t.array("recycles")
            for rt, ident in self._items_of(rec_arr, "flows.recycles", id_default=lambda i: f"IR{i}"):
                r = self.section(rt, self.recycle, ident, q)
                if r is not None:
                    recycles.append(r)
            ras = self.section(t.table("return_sludge", required=True), self.return_sludge, first, q)
            wasting = self.section(t.table("waste", required=True), self.waste, q)
            t.finish()
        if col.count == before and zone_ids:
            graph.check_train(col, zone_ids, step_feed, recycles, ras, wasting, q, known)
        return step_feed, recycles, ras, wasting

    def _flow_or_ratio(self, t: Table, q, ratio_bounds: dict, flow_bounds: dict, what: str):
        has_ratio, has_flow = t.has("ratio"), t.has("flow_m3_d")
        if has_ratio == has_flow:
            self.col.error(t.path, f"give either ratio or flow_m3_d for the {what}",
                           "both" if has_ratio else "neither", "exactly one of ratio, flow_m3_d")
            return None, None
        if has_ratio:
            ratio = t.number("ratio", **ratio_bounds)
            if ratio is None:
                return None, None
            if ratio > D.WARN_RECYCLE_RATIO:
                self.col.warn(t.key("ratio"), f"{what} ratio {ratio:g} of the influent flow is unusually high")
            return tuple(ratio * x for x in q), ratio
        return t.per_period("flow_m3_d", self.n, **flow_bounds), None

    def recycle(self, t: Table, ident, q) -> Recycle:
        frm = t.string("from_zone")
        to = t.string("to_zone")
        flow, ratio = self._flow_or_ratio(t, q, {"ge": 0.0}, {"ge": 0.0}, "recycle")
        return Recycle(ident, frm, to, flow, ratio)

    def return_sludge(self, t: Table | None, first, q) -> ReturnSludge | None:
        if t is None:
            return None  # the missing table is already reported
        to = t.string("to_zone", first)
        flow, ratio = self._flow_or_ratio(t, q, {"gt": 0.0, "le": 10.0}, {"gt": 0.0}, "return sludge")
        return ReturnSludge(to, flow, ratio)

    def waste(self, t: Table | None, q) -> Wasting | None:
        if t is None:
            return None  # the missing table is already reported
        has_srt, has_flow = t.has("srt_d"), t.has("flow_m3_d")
        if has_srt == has_flow:
            self.col.error(t.path, "give either srt_d or flow_m3_d for the waste sludge",
                           "both" if has_srt else "neither", "exactly one of srt_d, flow_m3_d")
            return Wasting(None, None)
        if has_srt:
            srt = t.number("srt_d", gt=0.0, le=1000.0)
            if srt is not None and not D.WARN_SRT_d[0] <= srt <= D.WARN_SRT_d[1]:
                self.col.warn(t.key("srt_d"), f"unusual target SRT {srt:g} d")
            return Wasting(None, srt)
        flow = t.per_period("flow_m3_d", self.n, gt=0.0)
        if flow is not None:
            bad = [p for p in range(self.n) if flow[p] >= q[p]]
            if bad and self.flows_known:
                self.col.error(t.key("flow_m3_d"), f"waste flow not below the influent flow (period {bad[0] + 1})",
                               flow[bad[0]], f"< {q[bad[0]]:g} m3/d")
        return Wasting(flow, None)

    # -- air ---------------------------------------------------------------------
    def blowers(self) -> list[Blower]:
        out = []
        for t, ident in self._items_of(self.root.array("blowers"), "blowers"):
            b = self.section(t, self.blower, ident)
            if b is not None:
                out.append(b)
        return out

    def blower(self, t: Table, ident) -> Blower:
        col = self.col
        kind = t.string("kind", choices=D.BLOWER_KINDS)
        qmin = t.number("airflow_min_Sm3_h", ge=0.0)
        qmax = t.number("airflow_max_Sm3_h", gt=0.0)
        pmax = t.number("pressure_max_gauge_kPa", gt=0.0, le=300.0)
        if qmin is not None and qmax is not None and qmax <= qmin:
            col.error(t.key("airflow_max_Sm3_h"), "must exceed airflow_min_Sm3_h", qmax, f"> {qmin:g}")
        given = [k for k in ("efficiency", "efficiency_points", "power_points") if t.has(k)]
        eff, pts, power_pts = None, (), ()
        if len(given) != 1:
            col.error(t.path, "give exactly one of efficiency, efficiency_points, power_points",
                      " and ".join(given) if given else "none", "exactly one of the three")
        elif given[0] == "efficiency":
            eff = t.number("efficiency", gt=0.0, le=1.0)
        elif given[0] == "efficiency_points":
            p = self._points(t, "efficiency_points", {"airflow_Sm3_h": {"ge": 0.0},
                                                      "efficiency": {"gt": 0.0, "le": 1.0}}, EfficiencyPoint)
            if p is not None and self._increasing_airflow(t, "efficiency_points", p, qmin, qmax):
                pts = p
        else:
            p = self._points(t, "power_points", {"airflow_Sm3_h": {"gt": 0.0},
                                                 "discharge_gauge_kPa": {"gt": 0.0, "le": 300.0},
                                                 "power_kW": {"gt": 0.0}}, PowerPoint)
            if p is not None and self._increasing_airflow(t, "power_points", p, qmin, qmax):
                pts = self._efficiency_from_power_points(t, p)
                power_pts = p if pts else ()
        if qmin is not None and qmax is not None and qmax > qmin and (eff is not None or pts):
            curve = equivalent_curve(qmin, qmax, eff, [(e.airflow_Sm3_h, e.efficiency) for e in pts])
            for why in power_curve_problems(curve):
                col.error(t.key(given[0]), why, [round(v, 1) for v in curve.airflow_Sm3_h],
                          "wire power positive and rising at a non-falling rate (convex) over the airflow range")
        ranges = ()
        if t.has("airflow_range_points"):
            ranges = self._range_points(t, qmin, qmax) or ()
        oos = t.boolean("out_of_service", False)
        up = t.number("min_up_h", D.BLOWER_MIN_UP_h, ge=0.0, le=units.HOURS_PER_DAY)
        down = t.number("min_down_h", D.BLOWER_MIN_DOWN_h, ge=0.0, le=units.HOURS_PER_DAY)
        starts = t.integer("max_starts_per_day", None, ge=0, le=1000)
        start_cost = t.number("start_cost", D.BLOWER_START_COST, ge=0.0)
        return Blower(ident, kind, qmin, qmax, pmax, eff, pts, power_pts, oos, up, down, starts, start_cost, ranges)

    def _range_points(self, t: Table, qmin, qmax):
        """Airflow range vs discharge pressure: pressure increasing, each range inside the nominal one."""
        key = t.key("airflow_range_points")
        pts = self._points(t, "airflow_range_points", {"discharge_gauge_kPa": {"gt": 0.0, "le": 300.0},
                                                      "airflow_min_Sm3_h": {"ge": 0.0},
                                                      "airflow_max_Sm3_h": {"gt": 0.0}}, RangePoint)
        if pts is None:
            return None
        before = self.col.count
        for i, r in enumerate(pts, start=1):
            if i > 1 and r.discharge_gauge_kPa <= pts[i - 2].discharge_gauge_kPa:
                self.col.error(f"{key}[{i}].discharge_gauge_kPa", "pressure must increase from point to point",
                               r.discharge_gauge_kPa, f"> {pts[i - 2].discharge_gauge_kPa:g}")
            if r.airflow_max_Sm3_h <= r.airflow_min_Sm3_h:
                self.col.error(f"{key}[{i}].airflow_max_Sm3_h", "must exceed the point's airflow_min_Sm3_h",
                               r.airflow_max_Sm3_h, f"> {r.airflow_min_Sm3_h:g}")
            elif qmin is not None and qmax is not None and (r.airflow_min_Sm3_h < qmin or r.airflow_max_Sm3_h > qmax):
                self.col.error(f"{key}[{i}]", "range outside the blower's airflow_min_Sm3_h-airflow_max_Sm3_h",
                               f"{r.airflow_min_Sm3_h:g}-{r.airflow_max_Sm3_h:g}", f"within {qmin:g}-{qmax:g}")
        return None if self.col.count > before else pts

    def _increasing_airflow(self, t: Table, name: str, p, qmin, qmax) -> bool:
        col = self.col
        ok = True
        for i in range(1, len(p)):
            if p[i].airflow_Sm3_h <= p[i - 1].airflow_Sm3_h:
                col.error(f"{t.key(name)}[{i + 1}].airflow_Sm3_h", "airflow must increase from point to point",
                          p[i].airflow_Sm3_h, f"> {p[i - 1].airflow_Sm3_h:g}")
                ok = False
        if ok and qmin is not None and qmax is not None and (qmin < p[0].airflow_Sm3_h or qmax > p[-1].airflow_Sm3_h):
            col.warn(t.key(name), f"points cover {p[0].airflow_Sm3_h:g}-{p[-1].airflow_Sm3_h:g} Sm3/h, the blower "
                                  f"runs {qmin:g}-{qmax:g}: efficiency is extrapolated")
        return ok

    def _efficiency_from_power_points(self, t: Table, p) -> tuple[EfficiencyPoint, ...]:
        """Wire-to-air efficiency at each duty point, at the layout's mean inlet conditions."""
        if self.air_conditions is None:
            return ()
        inlet_T, inlet_p, site_p = self.air_conditions
        out = []
        for i, pt in enumerate(p, start=1):
            e = float(efficiency_from_power(pt.airflow_Sm3_h, inlet_T, inlet_p, site_p + pt.discharge_gauge_kPa,
                                            pt.power_kW))
            if not 0.0 < e <= 1.0:
                self.col.error(f"{t.key('power_points')}[{i}].power_kW",
                               f"implies a wire-to-air efficiency of {e:.2f}", pt.power_kW,
                               "a power above the isentropic power of the duty point")
                return ()
            out.append(EfficiencyPoint(pt.airflow_Sm3_h, e))
        return tuple(out)

    def header(self, t: Table | None, blowers: list[Blower]) -> Header:
        known = [(b.airflow_max_Sm3_h, _blower_mean_efficiency(b)) for b in blowers]
        known = [(w, e) for w, e in known if e is not None]
        if known:
            default_eff = sum(w * e for w, e in known) / sum(w for w, _ in known)
        else:
            default_eff = D.AGGREGATE_EFFICIENCY_NO_BLOWERS
        if t is None:
            if "blowers" in self.root.data:
                self.col.error("header", "missing required section", None,
                               "a [header] table with loss_k_kPa_per_Sm3_h2 when there are blowers")
                return None
            return Header(0.0, D.MIN_VALVE_LOSS_kPa, default_eff)
        k = t.number("loss_k_kPa_per_Sm3_h2", ge=0.0)
        vmin = t.number("min_valve_loss_kPa", D.MIN_VALVE_LOSS_kPa, ge=0.0, le=50.0)
        eff = t.number("aggregate_efficiency", default_eff, gt=0.0, le=1.0)
        return Header(k, vmin, eff)

    def inlet_air(self, t: Table | None) -> InletAir:
        if t is None:
            return InletAir(tuple(D.INLET_TEMPERATURE_C for _ in range(self.n)), None, D.INLET_FILTER_LOSS_kPa)
        temp = t.per_period("temperature_C", self.n, D.INLET_TEMPERATURE_C, ge=-50.0, le=60.0)
        p = t.number("pressure_kPa", None, ge=50.0, le=110.0)
        loss = t.number("filter_loss_kPa", D.INLET_FILTER_LOSS_kPa, ge=0.0, le=20.0)
        return InletAir(temp, p, loss)

    # -- money, kinetics, operation ----------------------------------------------
    def tariff(self, t: Table | None) -> Tariff | None:
        if t is None:
            return None
        currency = t.string("currency")
        if isinstance(currency, str) and not currency.strip():
            self.col.error(t.key("currency"), "must not be empty", currency, 'a currency code such as "EUR"')
        prices = self._prices(t)
        demand = t.number("demand_charge_per_kW", 0.0, ge=0.0)
        days = t.number("demand_period_days", D.DEMAND_PERIOD_DAYS, gt=0.0, le=366.0)
        return Tariff(currency, prices, demand, days)

    def _prices(self, t: Table):
        key = t.key("price_per_kWh")
        if not t.has("price_per_kWh"):
            self.col.error(key, "missing required key", None,
                           f"a number, {self.n} numbers (one per period), or [start_h, price] bands")
            return None
        value = t.data["price_per_kWh"]
        if isinstance(value, list) and value and all(isinstance(v, list) for v in value):
            return self._bands(key, value)
        return t.per_period("price_per_kWh", self.n, ge=0.0)

    def _bands(self, key: str, bands: list) -> tuple[float, ...] | None:
        col = self.col
        before = col.count
        starts, prices = [], []
        for i, b in enumerate(bands, start=1):
            k = f"{key}[{i}]"
            if len(b) != 2:
                col.error(k, "a band is [start_h, price]", f"{len(b)} values", "2 values")
                continue
            s = check_number(col, f"{k}[1]", b[0], ge=0.0, lt=units.HOURS_PER_DAY)
            p = check_number(col, f"{k}[2]", b[1], ge=0.0)
            if s is not None and p is not None:
                starts.append((i, s))
                prices.append(p)
        if col.count > before:
            return None
        if starts[0][1] != 0.0:
            col.error(f"{key}[1][1]", "the first band must start at 0 h", starts[0][1], "0")
        for (_, a), (j, b) in zip(starts, starts[1:]):
            if b <= a:
                col.error(f"{key}[{j}][1]", "band starts must increase", b, f"> {a:g}")
        if col.count > before:
            return None
        times = [s for _, s in starts]
        ends = times[1:] + [units.HOURS_PER_DAY]
        h = units.HOURS_PER_DAY / self.n
        out = []
        for p in range(self.n):
            a, b = p * h, (p + 1) * h
            total = sum(max(0.0, min(b, t1) - max(a, t0)) * price for t0, t1, price in zip(times, ends, prices))
            out.append(total / h)
        return tuple(out)

    def kinetics(self, t: Table | None) -> Kinetics:
        if t is None:
            return Kinetics(D.PARAMETER_SET, (), D.TEMPERATURE_CORRECTION)
        pset = t.string("parameter_set", D.PARAMETER_SET, choices=D.PARAMETER_SETS)
        corr = t.boolean("temperature_correction", D.TEMPERATURE_CORRECTION)
        ov = t.table("overrides")
        pairs = []
        if ov is not None:
            for name in ov.data:
                if name in D.KINETIC_PARAMETER_NAMES:
                    top = D.KINETIC_PARAMETER_MAX[name]
                    v = (ov.number(name, gt=0.0, le=top) if name not in ("b_A", "b_H", "f_P", "i_XP")
                         else ov.number(name, ge=0.0, le=top))
                    if v is not None:
                        pairs.append((name, v))
            ov.allow(*D.KINETIC_PARAMETER_NAMES)
            ov.finish()
        pairs.sort(key=lambda kv: D.KINETIC_PARAMETER_NAMES.index(kv[0]))
        return Kinetics(pset, tuple(pairs), corr)

    def operation(self, t: Table | None, has_tariff: bool) -> Operation:
        default_obj = "cost" if has_tariff else "energy"
        if t is None:
            return Operation(D.BASELINE_DO_SETPOINT_mg_L, default_obj, D.SMOOTHING_WEIGHT)
        sp = t.number("baseline_do_setpoint_mg_L", D.BASELINE_DO_SETPOINT_mg_L, gt=0.0, le=20.0)
        obj = t.string("objective", default_obj, choices=OBJECTIVES)
        if obj == "cost" and not has_tariff:
            self.col.error(t.key("objective"), "a cost objective needs a [tariff]", obj, '"energy", or add [tariff]')
        w = t.number("smoothing_weight", D.SMOOTHING_WEIGHT, ge=0.0)
        return Operation(sp, obj, w)

    # -- design: capital costs and load days --------------------------------------
    def capital(self, t: Table | None, has_tariff: bool) -> Capital | None:
        if t is None:
            return None
        per_diffuser = t.number("cost_per_diffuser", ge=0.0)
        per_zone = t.number("cost_per_zone", D.COST_PER_ZONE, ge=0.0)
        rate = None
        raw = t.raw("interest_rate")
        if is_number(raw) and D.INTEREST_RATE_MAX < raw <= 100.0:
            self.col.error(t.key("interest_rate"), f"interest rate {raw:g}: was it typed in percent?", raw,
                           f"a fraction ({raw / 100.0:g} for {raw:g} %)")
        else:
            rate = t.number("interest_rate", D.INTEREST_RATE, ge=0.0, le=D.INTEREST_RATE_MAX)
        life = t.number("life_years", D.GRID_LIFE_YEARS, gt=0.0, le=100.0)
        if not has_tariff:
            self.col.error(t.path, "capital costs are weighed against the energy bill, which needs prices", None,
                           "a [tariff] (its currency and price_per_kWh) as well")
        return Capital(per_diffuser, per_zone, rate, life)

    def load_days(self, plant, zones, influent, flows, limits) -> tuple[LoadDay, ...]:
        arr = self.root.array("load_days")
        if arr is not None and not arr:
            self.col.error("load_days", "empty", None, "at least one [[load_days]] table, or none at all")
        items = self._items_of(arr, "load_days")
        days = []
        for t, ident in items:
            day = self.section(t, self.load_day, ident, zones, influent, flows, limits)
            if day is not None and ident is not None:
                days.append(day)
        if days and len(days) == len(items):
            total = sum(d.days_per_year for d in days)
            if abs(total - D.DAYS_PER_YEAR) > D.WARN_LOAD_DAYS_YEAR_TOLERANCE:
                self.col.warn("load_days", f"the days stand for {total:g} days, not a year ({D.DAYS_PER_YEAR:g}): "
                                           "annual sums scale with their weights")
        return tuple(days)

    def _factor(self, t: Table, name: str, default: float):
        raw = t.raw(name)
        if is_number(raw) and D.LOAD_DAY_FACTOR_MAX < raw <= 1000.0:
            self.col.error(t.key(name), f"factor {raw:g}: was it typed in percent?", raw,
                           f"a factor ({raw / 100.0:g} for {raw:g} %)")
            return None
        return t.number(name, default, gt=0.0, le=D.LOAD_DAY_FACTOR_MAX)

    def load_day(self, t: Table, ident, zones, influent, flows, limits) -> LoadDay | None:
        col = self.col
        basis = t.string("basis", None, choices=tuple(D.LOAD_DAY_BASES))
        weight = t.number("days_per_year", gt=0.0, le=366.0)
        base_flow, base_load = D.LOAD_DAY_BASES.get(basis, (D.LOAD_DAY_FACTOR, D.LOAD_DAY_FACTOR))
        csv_name = t.raw("influent_csv")
        own = None
        if csv_name is not None:
            for k in ("flow_factor", "load_factor"):
                t.allow(k)
                if k in t.data:
                    col.error(t.key(k), "scales the base profile, and this day has its own influent_csv", None,
                              "influent_csv alone, or flow_factor / load_factor alone")
            flow_f = load_f = 1.0
            own = read_day_influent(col, t.key("influent_csv"), csv_name, self.n, self.base_dir,
                                    influent.fractionation if influent is not None else None)
        else:
            flow_f = self._factor(t, "flow_factor", base_flow)
            load_f = self._factor(t, "load_factor", base_load)
        water = t.per_period("water_temperature_C", self.n, None, ge=0.0, le=45.0)
        if basis in D.LOAD_DAY_BASES_NEEDING_TEMPERATURE and not t.has("water_temperature_C"):
            col.error(t.key("water_temperature_C"), f"a {basis} day needs its own water temperature", None,
                      "a number, or one per period, in degC")
        if water is not None:
            lo, hi = D.WARN_WATER_TEMPERATURE_C
            odd = [x for x in water if not lo <= x <= hi]
            if odd:
                col.warn(t.key("water_temperature_C"),
                         f"water temperature {odd[0]:g} C is outside the usual {lo:g}-{hi:g} C")
        air = t.per_period("air_temperature_C", self.n, None, ge=-50.0, le=60.0)
        alpha_f = t.number("alpha_factor", D.LOAD_DAY_ALPHA_FACTOR, gt=0.0, le=2.0)
        top = _ZONE_NUMBER_BOUNDS["alpha"]["le"]
        if alpha_f is not None:
            for z in zones:
                if z is not None and z.alpha * alpha_f > top:
                    col.error(t.key("alpha_factor"), f"makes zone {z.id}'s alpha {z.alpha * alpha_f:.3g}, above "
                                                     f"{top:g}", alpha_f, f"<= {fixed(top / z.alpha, 3)}")
                    break
        lim_t = t.table("limits")
        day_limits = limits
        if lim_t is not None:
            day_limits = self.section(lim_t, self.day_limits, limits)
        zones_t = t.table("zones")
        zone_do = ()
        if zones_t is not None:
            zone_do = self.section(zones_t, self.day_zone_do, zones) or ()
        wasting = flows[3]
        if (wasting is not None and wasting.flow_m3_d is not None and influent is not None and flow_f is not None
                and (csv_name is None or own is not None)):
            q = own.flow_m3_d if own is not None else tuple(flow_f * x for x in influent.flow_m3_d)
            bad = [p for p in range(self.n) if wasting.flow_m3_d[p] >= q[p]]
            if bad:
                col.error(t.key("influent_csv" if own is not None else "flow_factor"),
                          f"the day's influent flow is not above the waste flow (period {bad[0] + 1})",
                          round(q[bad[0]], 1), f"> flows.waste.flow_m3_d = {wasting.flow_m3_d[bad[0]]:g} m3/d")
        return LoadDay(ident, weight, basis, flow_f, load_f, own, water, air, alpha_f, day_limits, zone_do)

    def day_zone_do(self, t: Table, zones) -> tuple[DayZoneDO, ...]:
        """A load day's own DO ranges (``[load_days.zones.<id>]``: ``do_min_mg_L``, ``do_max_mg_L``), each
        checked against the zone's own limit it leaves in place."""
        col = self.col
        known = {z.id: z for z in zones if z is not None and z.id is not None}
        complete = len(known) == len(zones)  # a zone that did not parse: its id is unknown, say nothing of it
        out = []
        for zid in list(t.data):
            t.allow(zid)
            z = known.get(zid)
            if z is None:
                if complete:
                    col.error(t.key(zid), "no such zone", zid,
                              "the id of an aerated or swing zone (" + ", ".join(
                                  k for k, v in known.items() if v.kind != "anoxic") + ")")
                continue
            zt = t.table(zid)
            if zt is None:
                continue
            if z.kind == "anoxic":
                col.error(t.key(zid), "an anoxic zone takes no air", None, "an aerated or swing zone's id")
                continue
            lo = zt.number("do_min_mg_L", None, ge=0.0, le=20.0)
            hi = zt.number("do_max_mg_L", None, gt=0.0, le=20.0)
            zt.finish()
            if not zt.data:
                col.error(t.key(zid), "names no DO limit", None, "do_min_mg_L and/or do_max_mg_L, in mg/L")
                continue
            if lo is None and hi is None:
                continue  # a bad value or an unknown key, reported
            low = lo if lo is not None else z.do_min_mg_L
            high = hi if hi is not None else z.do_max_mg_L
            if low is not None and high is not None and high <= low:
                if hi is not None:
                    col.error(zt.key("do_max_mg_L"), "must exceed the day's DO minimum", hi, f"> {low:g}")
                else:
                    col.error(zt.key("do_min_mg_L"), f"must be below the zone's DO maximum ({high:g})", lo,
                              f"< {high:g}")
                continue
            out.append(DayZoneDO(zid, lo, hi))
        return tuple(out)

    def day_limits(self, t: Table, limits: Limits | None) -> Limits | None:
        given = {k: t.number(k, None, gt=0.0) for k in ("nh4_mean_mg_L", "nh4_max_mg_L", "tn_mean_mg_L")}
        if limits is None:
            return None
        merged = Limits(**{k: (v if v is not None else getattr(limits, k)) for k, v in given.items()})
        if (merged.nh4_mean_mg_L is not None and merged.nh4_max_mg_L is not None
                and merged.nh4_max_mg_L < merged.nh4_mean_mg_L):
            self.col.error(t.key("nh4_max_mg_L"), "the maximum period mean must not be below the daily mean",
                           merged.nh4_max_mg_L, f">= nh4_mean_mg_L = {merged.nh4_mean_mg_L:g}")
        return merged

    # -- checks across sections --------------------------------------------------
    def cross_checks(self, plant, zones: list[Zone], n_zones: int, types: dict, blowers, header, influent, flows,
                     limits) -> None:
        col = self.col
        used_types = set()
        for z in zones:
            key = f"zones.{z.id}"
            if z.volume_m3 < D.WARN_ZONE_VOLUME_m3[0]:
                col.warn(f"{key}.volume_m3", f"very small zone ({z.volume_m3:g} m3)")
            elif z.volume_m3 > D.WARN_ZONE_VOLUME_m3[1]:
                col.warn(f"{key}.volume_m3", f"very large zone ({z.volume_m3:g} m3): was it typed in litres?")
            if z.depth_m > D.WARN_DEPTH_MM_m:
                col.warn(f"{key}.depth_m", f"side-water depth {z.depth_m:g} m: was it typed in mm "
                                           f"({z.depth_m / 1000:g} m)?")
            elif not D.WARN_DEPTH_m[0] <= z.depth_m <= D.WARN_DEPTH_m[1]:
                col.warn(f"{key}.depth_m", f"unusual side-water depth {z.depth_m:g} m")
            if z.grid is None or z.grid.type_id not in self.membrane_areas:
                continue
            used_types.add(z.grid.type_id)
            membrane = self.membrane_areas[z.grid.type_id]
            density = 100.0 * z.grid.count * membrane / z.area_m2
            if density > D.DENSITY_MAX_PERCENT:
                fits = int(D.DENSITY_MAX_PERCENT / 100.0 * z.area_m2 / membrane)
                col.error(f"{key}.grid.count", f"diffusers cover {fixed(density, 1)} % of the floor, more than fits",
                          z.grid.count, f"<= {fits} ({D.DENSITY_MAX_PERCENT:g} % of {fixed(z.area_m2, 1)} m2)")
                continue
            if z.grid.type_id not in types:
                continue
            dt = types[z.grid.type_id]
            dens = [p.density_percent for p in dt.sote_points]
            if not min(dens) <= density <= max(dens):
                col.warn(f"{key}.grid.count", f"diffuser density {fixed(density, 1)} % is outside the tested "
                                              f"{min(dens):g}-{max(dens):g} %: SOTE is extrapolated")
            subs = [p.submergence_m for p in dt.sote_points]
            if not min(subs) <= z.grid.submergence_m <= max(subs):
                col.warn(f"{key}.grid.submergence_m", f"submergence {z.grid.submergence_m:g} m is outside the "
                                                      f"tested {min(subs):g}-{max(subs):g} m: SOTE is extrapolated")
            lo, hi = z.airflow_range_Sm3_h(dt)
            if lo > hi:
                col.error(f"{key}.grid", "no feasible airflow: the minimum exceeds what grid and valve pass",
                          f"minimum {fixed(lo, 0)} Sm3/h", f"<= maximum {fixed(hi, 0)} Sm3/h")
        for tid in sorted(set(types) - used_types - {z.grid.type_id for z in zones if z.grid is not None}):
            col.warn(f"diffuser_types.{tid}", "diffuser type used by no zone")
        for b in blowers:
            effs = [b.efficiency] if b.efficiency is not None else [e.efficiency for e in b.efficiency_points]
            if effs and min(effs) < D.WARN_BLOWER_EFFICIENCY_MIN:
                col.warn(f"blowers.{b.id}", f"wire-to-air efficiency {min(effs):.3g} is unusually low (usual above "
                                            f"{D.WARN_BLOWER_EFFICIENCY_MIN:g}): was it divided by 100?")
        gridded = [z for z in zones if z.grid is not None]
        if gridded and not blowers and not self.root.data.get("blowers"):  # absent or empty; bad ones are reported
            col.error("blowers", "zones have diffuser grids but there are no blowers", None,
                      "at least one [[blowers]] table")
        if gridded and blowers:
            deepest = max(gridded, key=lambda z: z.grid.submergence_m)
            static = units.m_water_to_kPa(deepest.grid.submergence_m)
            for b in blowers:
                if b.pressure_max_gauge_kPa <= static:
                    col.error(f"blowers.{b.id}.pressure_max_gauge_kPa",
                              f"below the static head of the deepest grid ({deepest.id}, "
                              f"{deepest.grid.submergence_m:g} m)", b.pressure_max_gauge_kPa,
                              f"> {fixed(static, 1)} kPa")
            if len(zones) == n_zones and all(z.grid is None or z.grid.type_id in types for z in zones):
                need = sum(z.airflow_range_Sm3_h(types[z.grid.type_id])[0] for z in gridded if z.kind == "aerated")
                have = sum(b.airflow_max_Sm3_h for b in blowers if not b.out_of_service)
                if all(b.out_of_service for b in blowers):
                    col.error("blowers", "every blower is out of service", f"{len(blowers)} out of service",
                              "at least one blower in service")
                elif have < need:
                    col.error("blowers", "all blowers together cannot supply the zones' minimum airflow",
                              f"{have:g} Sm3/h", f">= {fixed(need, 0)} Sm3/h")
        if influent is not None:
            qm = influent.mean_flow_m3_d
            if not D.WARN_MEAN_FLOW_m3_d[0] <= qm <= D.WARN_MEAN_FLOW_m3_d[1]:
                if influent.source == "constant":
                    col.warn("influent.flow_m3_d", f"unusual mean influent flow {qm:g} m3/d")
                else:  # name the CSV the flows were read from
                    col.warn("column flow_m3_d", f"unusual mean influent flow {qm:g} m3/d",
                             file=csv_display_path(col.file, self.base_dir, influent.source))
            # the measured forms (CSV rows, constant values) are checked for unit slips where they are read
            if zones and len(zones) == n_zones:
                hrt = sum(z.volume_m3 for z in zones) / qm * units.HOURS_PER_DAY
                if not D.WARN_TRAIN_HRT_h[0] <= hrt <= D.WARN_TRAIN_HRT_h[1]:
                    col.warn("zones", f"train HRT {fixed(hrt, 1)} h at the mean influent flow is unusual "
                                      f"(usual {D.WARN_TRAIN_HRT_h[0]:g}-{D.WARN_TRAIN_HRT_h[1]:g} h): "
                                      "check the volumes and their units")


_ZONE_NUMBER_BOUNDS = {
    "alpha": {"gt": 0.0, "le": 1.2},
    "beta": {"gt": 0.0, "le": 1.0},
    "fouling": {"gt": 0.0, "le": 1.0},
    "mixing_airflow_min_Sm3_h_m2": {"ge": 0.0, "le": 100.0},
    "drop_leg_k_kPa_per_Sm3_h2": {"ge": 0.0},
}


def _duty_point_conditions(plant: Plant | None, inlet: InletAir | None):
    """(inlet temperature degC, absolute inlet pressure kPa, site pressure kPa) for converting power points."""
    if plant is None or inlet is None:
        return None
    site = plant.site_pressure_kPa
    return sum(inlet.temperature_C) / len(inlet.temperature_C), inlet.blower_inlet_pressure_kPa(site), site


def _blower_mean_efficiency(b: Blower) -> float | None:
    """The blower's mean wire-to-air efficiency, or None when it is not known.

    Power points are turned into efficiencies at the site's air conditions; when
    the plant or inlet-air section has a problem (a missing elevation, a water
    temperature out of range) they cannot be, the problem is already reported
    there, and this blower then counts in no default.
    """
    if b.efficiency is not None:
        return b.efficiency
    if not b.efficiency_points:
        return None
    return sum(p.efficiency for p in b.efficiency_points) / len(b.efficiency_points)


__all__ = ["load_layout", "parse_layout", "parse_toml_text", "LayoutWarning"]
