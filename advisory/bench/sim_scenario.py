"""Scenario files for ``simulate`` and campaigns: load and check them (``docs/scenarios.md``).

A scenario is TOML (or the same structure as a plain dict, which is how campaigns pass
encounters to worker processes). :func:`scenario_from_dict` checks every table and key:
an unknown key, a missing required key or a value out of range raises
:class:`ScenarioError` with one line naming the key and the value. The result is a tree
of frozen dataclasses in the file's own units (ft, kt, deg, psf); the simulator converts
to SI.

One compatible extension of ``docs/scenarios.md``: an optional ``[truth]`` table with
``emission_interval_s`` (default 0.1) and ``azimuth_step_deg`` (default 1) sets how
finely the truth is traced (campaigns and tests use coarser steps).

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from advisory.bench.feed import FAULT_KINDS, NOISE_FIELDS, Fault, FeedSettings
from advisory.bench.flight import BANK_LIMIT_DEG, FPA_LIMIT_DEG, Segment
from advisory.pipeline.zone_file import DEFAULT_MARGIN_KM, GROUND_ELEVATION_RANGE_FT, MAX_MARGIN_KM
from advisory.tomlfile import read_toml

SEGMENT_KINDS = ("hold", "turn", "mach", "climb", "pitch")
CREW_MODES = ("ignore", "follow")
ACT_ON = ("advisory", "caution", "warning")
NAME_RE = re.compile(r"^[A-Za-z0-9_.-]{1,80}$")
MAX_DURATION_S = 7200.0


class ScenarioError(ValueError):
    """A scenario that cannot be flown; the one-line message names the key and value."""


@dataclass(frozen=True)
class Start:
    """Start state (edge units)."""

    lat_deg: float
    lon_deg: float
    alt_ft: float
    mach: float
    heading_deg: float
    fpa_deg: float = 0.0
    bank_deg: float = 0.0


@dataclass(frozen=True)
class AirSpec:
    """An atmosphere: standard with ``isa_offset_c``, a ``profile`` file (absolute path)
    or inline ``levels`` (alt_ft, temp_c, wind_from_deg, wind_kt)."""

    isa_offset_c: float = 0.0
    profile: str | None = None
    levels: tuple[tuple[float, float, float, float], ...] = ()


@dataclass(frozen=True)
class AdvisorSpec:
    """What the advisor is given. ``atmosphere`` None: the truth's. ``grid``: a dict of
    grid keys (``altitudes_ft``, ``mach_excess``, ``fpa_deg``, ``headings_deg``, ...)
    or None (chosen around the flight); ``grid_file``/``table``/``config``: paths."""

    atmosphere: AirSpec | None = None
    table: str | None = None
    grid: dict[str, Any] | None = None
    grid_file: str | None = None
    config: str | None = None
    rate_hz: float = 10.0


@dataclass(frozen=True)
class ZoneSpec:
    """An inline zone: ``circle`` (lat, lon, radius km) or ``polygon`` ((lat, lon), ...)."""

    zone_id: str
    name: str
    limit_psf: float = 0.0
    margin_km: float = DEFAULT_MARGIN_KM
    ground_elevation_ft: float = 0.0
    circle: tuple[float, float, float] | None = None
    polygon: tuple[tuple[float, float], ...] | None = None


@dataclass(frozen=True)
class CrewSpec:
    """The crew model's parameters (``[crew]``)."""

    mode: str = "ignore"
    reaction_s: float = 5.0
    decel_mach_per_s: float = 0.01
    bank_deg: float = 30.0
    roll_rate_deg_s: float = 5.0
    act_on: str = "caution"


@dataclass(frozen=True)
class TruthSpec:
    """How finely the truth is traced (``[truth]``, an extension; module notes)."""

    emission_interval_s: float = 0.1
    azimuth_step_deg: float = 1.0
    #: Also fly the truth's act-by of every exposure over its limit when the crew ignores
    #: the cues (:mod:`advisory.bench.truth_act_by`; ``campaign --known`` sets it).
    act_by: bool = False


@dataclass(frozen=True)
class Scenario:
    """A whole scenario (see ``docs/scenarios.md``).

    ``zones`` holds the inline zones; ``zones_file`` the GeoJSON file when the scenario
    names one instead (absolute path). ``base_dir`` is where relative paths were resolved.
    """

    name: str
    duration_s: float
    start: Start
    title: str = ""
    description: str = ""
    seed: int = 0
    schedule: tuple[Segment, ...] = ()
    atmosphere: AirSpec = AirSpec()
    advisor: AdvisorSpec = AdvisorSpec()
    zones: tuple[ZoneSpec, ...] = ()
    zones_file: str | None = None
    source: FeedSettings = FeedSettings()
    crew: CrewSpec = CrewSpec()
    truth: TruthSpec = TruthSpec()
    base_dir: str | None = None


class _Table:
    """Reads one TOML table, checking keys and values (messages name ``where.key``)."""

    def __init__(self, doc: Any, where: str, required: bool = False) -> None:
        if doc is None and not required:
            doc = {}
        if not isinstance(doc, dict):
            raise ScenarioError(f"{where}: must be a table, got {doc!r}")
        self.doc, self.where = doc, where
        self.used: set[str] = set()

    def key(self, k: str) -> str:
        return f"{self.where}.{k}" if self.where else k

    def get(self, k: str) -> Any:
        self.used.add(k)
        return self.doc.get(k)

    def has(self, k: str) -> bool:
        return k in self.doc

    def num(self, k: str, lo: float, hi: float, default: float | None = None,
            required: bool = False, lo_open: bool = False) -> float | None:
        v = self.get(k)
        if v is None:
            if required:
                raise ScenarioError(f"{self.key(k)}: missing (required)")
            return default
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise ScenarioError(f"{self.key(k)} = {v!r}: must be a number")
        if v > hi or v < lo or (lo_open and v == lo):
            lo_b = "(" if lo_open else "["
            raise ScenarioError(f"{self.key(k)} = {v!r}: must be in {lo_b}{lo:g}, {hi:g}]")
        return float(v)

    def text(self, k: str, choices: tuple[str, ...] | None = None, default: str | None = None,
             required: bool = False) -> str | None:
        v = self.get(k)
        if v is None:
            if required:
                raise ScenarioError(f"{self.key(k)}: missing (required)")
            return default
        if not isinstance(v, str):
            raise ScenarioError(f"{self.key(k)} = {v!r}: must be a string")
        if choices is not None and v not in choices:
            raise ScenarioError(f"{self.key(k)} = {v!r}: must be one of {', '.join(choices)}")
        return v

    def flag(self, k: str, default: bool) -> bool:
        v = self.get(k)
        if v is None:
            return default
        if not isinstance(v, bool):
            raise ScenarioError(f"{self.key(k)} = {v!r}: must be true or false")
        return v

    def done(self) -> None:
        unknown = sorted(set(self.doc) - self.used)
        if unknown:
            k = unknown[0]
            raise ScenarioError(f"{self.key(k)} = {self.doc[k]!r}: unknown key")


def _path(value: str, base: Path | None, key: str) -> str:
    p = Path(value)
    if not p.is_absolute() and base is not None:
        p = base / p
    if not p.is_file():
        raise ScenarioError(f"{key} = {value!r}: no such file")
    return str(p)


def _start(doc: Any) -> Start:
    t = _Table(doc, "start", required=True)
    s = Start(
        lat_deg=t.num("lat_deg", -90.0, 90.0, required=True) or 0.0,
        lon_deg=t.num("lon_deg", -180.0, 180.0, required=True) or 0.0,
        alt_ft=t.num("alt_ft", 0.0, 80000.0, required=True) or 0.0,
        mach=t.num("mach", 0.0, 4.0, required=True, lo_open=True) or 0.0,
        heading_deg=t.num("heading_deg", -360.0, 360.0, required=True) or 0.0,
        fpa_deg=t.num("fpa_deg", -FPA_LIMIT_DEG, FPA_LIMIT_DEG, 0.0) or 0.0,
        bank_deg=t.num("bank_deg", -BANK_LIMIT_DEG, BANK_LIMIT_DEG, 0.0) or 0.0,
    )
    t.done()
    return s


def _segment(doc: Any, where: str, duration: float) -> Segment:
    t = _Table(doc, where, required=True)
    kind = t.text("kind", SEGMENT_KINDS, required=True)
    kw: dict[str, Any] = {"kind": kind, "at_s": t.num("at_s", 0.0, duration),
                          "duration_s": t.num("duration_s", 0.0, MAX_DURATION_S,
                                              lo_open=True)}
    if kind == "hold":
        if kw["duration_s"] is None:
            raise ScenarioError(f"{where}.duration_s: missing (required for kind = 'hold')")
    elif kind == "mach":
        kw["target_mach"] = t.num("target_mach", 0.0, 4.0, required=True, lo_open=True)
        kw["mach_rate_per_s"] = t.num("mach_rate_per_s", 0.0, 1.0, required=True,
                                      lo_open=True)
    elif kind == "turn":
        bank = t.num("bank_deg", -BANK_LIMIT_DEG, BANK_LIMIT_DEG, required=True)
        if bank == 0.0:
            raise ScenarioError(f"{where}.bank_deg = 0: a turn needs a bank")
        kw["bank_deg"] = bank
        kw["roll_rate_deg_s"] = t.num("roll_rate_deg_s", 0.0, 60.0, 5.0, lo_open=True)
        kw["heading_change_deg"] = t.num("heading_change_deg", -3600.0, 3600.0)
        _one_of(where, kw, "heading_change_deg", "duration_s")
        if kw["heading_change_deg"] is not None and kw["heading_change_deg"] * bank < 0:
            raise ScenarioError(f"{where}.heading_change_deg = {kw['heading_change_deg']!r}: "
                                f"its sign must be that of bank_deg ({bank:g})")
    elif kind == "climb":
        kw["fpa_deg"] = t.num("fpa_deg", -FPA_LIMIT_DEG, FPA_LIMIT_DEG, required=True)
        kw["pitch_rate_deg_s"] = t.num("pitch_rate_deg_s", 0.0, 10.0, 1.0, lo_open=True)
        kw["target_alt_ft"] = t.num("target_alt_ft", 0.0, 80000.0)
        _one_of(where, kw, "target_alt_ft", "duration_s")
    else:  # pitch
        rate = t.num("pitch_rate_deg_s", -10.0, 10.0, required=True)
        if rate == 0.0:
            raise ScenarioError(f"{where}.pitch_rate_deg_s = 0: must not be 0")
        kw["pitch_rate_deg_s"] = rate
        if kw["duration_s"] is None:
            raise ScenarioError(f"{where}.duration_s: missing (required for kind = 'pitch')")
    t.done()
    return Segment(**kw)


def _one_of(where: str, kw: dict[str, Any], a: str, b: str) -> None:
    if (kw.get(a) is None) == (kw.get(b) is None):
        raise ScenarioError(f"{where}: give exactly one of {a} and {b}")


def _air(doc: Any, where: str, base: Path | None) -> AirSpec:
    t = _Table(doc, where)
    given = [k for k in ("isa_offset_c", "profile", "levels") if t.has(k)]
    if len(given) > 1:
        raise ScenarioError(f"{where}: give at most one of isa_offset_c, profile, levels "
                            f"(got {', '.join(given)})")
    offset = t.num("isa_offset_c", -50.0, 50.0, 0.0) or 0.0
    prof = t.text("profile")
    profile = _path(prof, base, f"{where}.profile") if prof is not None else None
    raw = t.get("levels")
    levels: list[tuple[float, float, float, float]] = []
    if raw is not None:
        if not isinstance(raw, list) or len(raw) < 2:
            raise ScenarioError(f"{where}.levels = {raw!r}: must be a list of >= 2 levels")
        for i, row in enumerate(raw):
            ok = isinstance(row, list) and len(row) == 4 and all(
                isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
                for v in row)
            if not ok:
                raise ScenarioError(f"{where}.levels[{i}] = {row!r}: must be [alt_ft, temp_c, "
                                    "wind_from_deg, wind_kt]")
            levels.append((float(row[0]), float(row[1]), float(row[2]), float(row[3])))
    t.done()
    return AirSpec(offset, profile, tuple(levels))


def _advisor(doc: Any, base: Path | None) -> AdvisorSpec:
    t = _Table(doc, "advisor")
    atm = _air(t.get("atmosphere"), "advisor.atmosphere", base) if t.has("atmosphere") \
        else None
    table = t.text("table")
    config = t.text("config")
    grid_raw = t.get("grid")
    grid: dict[str, Any] | None = None
    grid_file = None
    if isinstance(grid_raw, str):
        grid_file = _path(grid_raw, base, "advisor.grid")
    elif grid_raw is not None:
        g = _Table(grid_raw, "advisor.grid")
        known = ("altitudes_ft", "mach_excess", "fpa_deg", "headings_deg", "n_eta", "mach_max")
        for k in known:
            g.get(k)
        g.done()
        grid = dict(grid_raw)
    spec = AdvisorSpec(
        atmosphere=atm,
        table=_path(table, base, "advisor.table") if table is not None else None,
        grid=grid, grid_file=grid_file,
        config=_path(config, base, "advisor.config") if config is not None else None,
        rate_hz=t.num("rate_hz", 0.0, 1000.0, 10.0, lo_open=True) or 10.0,
    )
    t.done()
    return spec


def _zone(doc: Any, where: str) -> ZoneSpec:
    t = _Table(doc, where, required=True)
    zid = t.text("id", required=True) or ""
    if not zid.strip():
        raise ScenarioError(f"{where}.id = {zid!r}: must not be empty")
    circle, polygon = t.get("circle"), t.get("polygon")
    if (circle is None) == (polygon is None):
        raise ScenarioError(f"{where}: give exactly one of circle and polygon")
    c = p = None
    if circle is not None:
        if not (isinstance(circle, list) and len(circle) == 3 and _numbers(circle)
                and -90 <= circle[0] <= 90 and -180 <= circle[1] <= 180
                and 0 < circle[2] <= 500):
            raise ScenarioError(f"{where}.circle = {circle!r}: must be [lat_deg, lon_deg, "
                                "radius_km] with 0 < radius_km <= 500")
        c = (float(circle[0]), float(circle[1]), float(circle[2]))
    else:
        if not (isinstance(polygon, list) and len(polygon) >= 3 and all(
                isinstance(v, list) and len(v) == 2 and _numbers(v)
                and -90 <= v[0] <= 90 and -180 <= v[1] <= 180 for v in polygon)):
            raise ScenarioError(f"{where}.polygon = {polygon!r}: must be >= 3 [lat_deg, "
                                "lon_deg] pairs")
        p = tuple((float(a), float(b)) for a, b in polygon)
    lo, hi = GROUND_ELEVATION_RANGE_FT
    z = ZoneSpec(
        zone_id=zid, name=t.text("name", default=zid) or zid,
        limit_psf=t.num("limit_psf", 0.0, 100.0, 0.0) or 0.0,
        margin_km=t.num("margin_km", 0.0, MAX_MARGIN_KM, DEFAULT_MARGIN_KM) or 0.0,
        ground_elevation_ft=t.num("ground_elevation_ft", lo, hi, 0.0) or 0.0,
        circle=c, polygon=p)
    t.done()
    return z


def _numbers(v: list[Any]) -> bool:
    return all(isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)
               for x in v)


def _source(doc: Any, duration: float) -> FeedSettings:
    t = _Table(doc, "source")
    noise_t = _Table(t.get("noise"), "source.noise")
    noise = {k: noise_t.num(k, 0.0, 100.0, 0.0) or 0.0 for k in NOISE_FIELDS}
    noise_t.done()
    faults = []
    raw = t.get("faults") or []
    if not isinstance(raw, list):
        raise ScenarioError(f"source.faults = {raw!r}: must be a list of tables")
    for i, f in enumerate(raw):
        ft = _Table(f, f"source.faults[{i}]", required=True)
        kind = ft.text("kind", FAULT_KINDS, required=True) or ""
        t0 = ft.num("t0_s", 0.0, duration, required=True) or 0.0
        t1 = ft.num("t1_s", 0.0, MAX_DURATION_S, required=True) or 0.0
        if t1 <= t0:
            raise ScenarioError(f"source.faults[{i}].t1_s = {t1!r}: must be after t0_s ({t0!r})")
        ft.done()
        faults.append(Fault(kind, t0, t1))
    s = FeedSettings(
        rate_hz=t.num("rate_hz", 1.0, 100.0, 20.0) or 20.0,
        format=t.text("format", ("stream", "datagram"), "stream") or "stream",
        latency_s=t.num("latency_s", 0.0, 5.0, 0.004) or 0.0,
        jitter_s=t.num("jitter_s", 0.0, 5.0, 0.003) or 0.0,
        noise=noise, faults=tuple(faults), targets=t.flag("targets", False))
    t.done()
    return s


def _crew(doc: Any) -> CrewSpec:
    t = _Table(doc, "crew")
    c = CrewSpec(
        mode=t.text("mode", CREW_MODES, "ignore") or "ignore",
        reaction_s=t.num("reaction_s", 0.0, 120.0, 5.0) or 0.0,
        decel_mach_per_s=t.num("decel_mach_per_s", 0.0, 1.0, 0.01, lo_open=True) or 0.01,
        bank_deg=t.num("bank_deg", 0.0, BANK_LIMIT_DEG, 30.0, lo_open=True) or 30.0,
        roll_rate_deg_s=t.num("roll_rate_deg_s", 0.0, 60.0, 5.0, lo_open=True) or 5.0,
        act_on=t.text("act_on", ACT_ON, "caution") or "caution",
    )
    t.done()
    return c


def _truth(doc: Any) -> TruthSpec:
    t = _Table(doc, "truth")
    s = TruthSpec(
        emission_interval_s=t.num("emission_interval_s", 0.0, 10.0, 0.1, lo_open=True) or 0.1,
        azimuth_step_deg=t.num("azimuth_step_deg", 0.0, 90.0, 1.0, lo_open=True) or 1.0,
        act_by=t.flag("act_by", False))
    t.done()
    return s


def scenario_from_dict(doc: Any, base_dir: str | Path | None = None) -> Scenario:
    """Check a scenario (the TOML structure as a dict) and build it.

    ``base_dir`` resolves relative file names (None: the current directory).

    Raises
    ------
    ScenarioError
        One line naming the key and the value (see the module notes).
    """
    base = Path(base_dir) if base_dir is not None else None
    t = _Table(doc, "", required=True)
    name = t.text("name", required=True) or ""
    if not NAME_RE.match(name):
        raise ScenarioError(f"name = {name!r}: use 1-80 of A-Z a-z 0-9 _ . -")
    duration = t.num("duration_s", 0.0, MAX_DURATION_S, required=True, lo_open=True) or 1.0
    seed = t.get("seed")
    if seed is None:
        seed = 0
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise ScenarioError(f"seed = {seed!r}: must be a whole number >= 0")
    sched = t.get("schedule") or []
    if not isinstance(sched, list):
        raise ScenarioError(f"schedule = {sched!r}: must be a list of tables ([[schedule]])")
    zones_raw = t.get("zones")
    zones: tuple[ZoneSpec, ...] = ()
    zones_file = None
    if isinstance(zones_raw, str):
        zones_file = _path(zones_raw, base, "zones")
    elif isinstance(zones_raw, list):
        zones = tuple(_zone(z, f"zones[{i}]") for i, z in enumerate(zones_raw))
        ids = [z.zone_id for z in zones]
        dup = next((i for i in ids if ids.count(i) > 1), None)
        if dup is not None:
            raise ScenarioError(f"zones: id = {dup!r} appears twice")
    elif zones_raw is not None:
        raise ScenarioError(f"zones = {zones_raw!r}: must be a file name or [[zones]] tables")
    sc = Scenario(
        name=name, duration_s=duration, start=_start(t.get("start")),
        title=t.text("title", default="") or "", description=t.text("description", default="")
        or "", seed=int(seed),
        schedule=tuple(_segment(s, f"schedule[{i}]", duration) for i, s in enumerate(sched)),
        atmosphere=_air(t.get("atmosphere"), "atmosphere", base),
        advisor=_advisor(t.get("advisor"), base), zones=zones, zones_file=zones_file,
        source=_source(t.get("source"), duration), crew=_crew(t.get("crew")),
        truth=_truth(t.get("truth")), base_dir=str(base) if base is not None else None,
    )
    t.done()
    return sc


def load_scenario_file(path: str | Path) -> Scenario:
    """Read and check a scenario file (TOML); relative paths are taken from its folder."""
    p = Path(path)
    doc = read_toml(p, f"SCENARIO {path}", ScenarioError)
    try:
        return scenario_from_dict(doc, p.resolve().parent)
    except ScenarioError as exc:
        raise ScenarioError(f"SCENARIO {path}: {exc}") from None
