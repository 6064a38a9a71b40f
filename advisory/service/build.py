"""Put the ``run`` service together from its settings: files, tables, links, record.

* Tables: ``--table FILE``, or the default table for the aircraft (built once, cached).
  ``--profile FILE`` rebuilds the table for that atmosphere profile off the hot path
  (:class:`advisory.tables.manager.TableManager`), at start when the profile differs
  from the table's atmosphere and again whenever the file changes; the advisories say
  ``tables_stale`` meanwhile.
* A throw-away advisor step before the first real one, so the first step does not load
  compiled kernels.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from pathlib import Path

from advisory import units
from advisory.io.framing import AuthVerifier, load_auth_key
from advisory.io.records import Recorder
from advisory.io.transports import UdpTransport
from advisory.io.transports.udp import SourceGate, parse_allow_from
from advisory.physics.atmosphere import standard_atmosphere
from advisory.physics.profile_file import load_profile
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig, load_config
from advisory.pipeline.profile import StreamProfile
from advisory.pipeline.state import AirDataState
from advisory.pipeline.zones import ZoneSet
from advisory.service.links import InputLink, OutputPublisher
from advisory.service.loop import AdvisoryLoop
from advisory.service.settings import RunError, RunSettings, check_settings
from advisory.tables.cache import default_table
from advisory.tables.grid import WIND_HEADINGS_DEG
from advisory.tables.levels import level_inputs, level_table
from advisory.tables.manager import TableManager
from advisory.tables.table import BoomTable
from advisory.tables.verify import inputs_from_table


def load_tables(s: RunSettings) -> tuple[BoomTable, TableManager | None]:
    """(table, manager or None) for the settings: the manager (with ``--profile``)
    starts from the table and swaps in rebuilt ones."""
    if s.table:
        if not Path(s.table).is_file():
            raise RunError(f"--table: {s.table}: no such file")
        table = BoomTable.load(s.table)
    else:
        table = default_table(s.aircraft)
    if not s.profile:
        return table, None
    atm = load_profile(s.profile)
    grid = table.grid
    windy = bool(abs(atm.wind_east_mps).max() > 0 or abs(atm.wind_north_mps).max() > 0)
    if windy and len(grid.headings_rad) == 1:  # a windy atmosphere needs the heading axis
        grid = replace(grid, headings_rad=tuple(math.radians(h) for h in WIND_HEADINGS_DEG))
    mgr = TableManager(table, replace(inputs_from_table(table), grid=grid))
    if atm.description != table.header.get("atmosphere"):
        mgr.submit_atmosphere(atm)
    mgr.watch_profile_file(s.profile)
    return table, mgr


def _level_managers(manager: TableManager) -> Callable[[BoomTable, float], TableManager]:
    """Each higher ground level's table under its own manager: rebuilt for the air the
    base table is rebuilt for (:meth:`advisory.pipeline.advisor.Advisor.step`)."""
    def make(table: BoomTable, ground_m: float) -> TableManager:
        return TableManager(level_table(table, ground_m),
                            level_inputs(manager.inputs, ground_m))
    return make


def guard_input(inp: InputLink, s: RunSettings) -> None:
    """Who may send to a UDP input (``--allow-from``, else the first source) and, with
    ``--auth-key``, authenticated frames only (``docs/interface.md`` sections 7.1, 10)."""
    if not isinstance(inp.transport, UdpTransport):
        return
    try:
        allowed = parse_allow_from(s.allow_from) if s.allow_from is not None else ()
        key = load_auth_key(s.auth_key) if s.auth_key is not None else None
    except ValueError as exc:
        raise RunError(str(exc)) from None
    inp.transport.gate = SourceGate(allowed)
    if key is not None:
        inp.transport.auth = AuthVerifier(key)


def warm_up(table: BoomTable, zones: ZoneSet, config: AdvisorConfig) -> None:
    """One throw-away step so the first real step does not load compiled kernels."""
    try:
        alt = float(table.ax_alt[len(table.ax_alt) // 2])
        mach = table.cutoff_mach(alt) + 0.3
        sound = float(standard_atmosphere().at(alt).sound_speed_mps)
        lat, lon = 0.0, 0.0
        if len(zones):  # a degree south of the first zone, heading for it
            ring = zones[0].polygons[0][0]
            lon, lat = float(ring[0, 0]) / units.DEG, float(ring[0, 1]) / units.DEG
        fields = {"lat_deg": max(min(lat - 1.0, 89.0), -89.0), "lon_deg": lon,
                  "alt_ft": units.m_to_ft(alt), "mach": mach, "heading_deg": 0.0,
                  "gs_kt": mach * sound / units.KT, "bank_deg": 0.0, "fpa_deg": 0.0}
        st = AirDataState.from_fields(fields, rx_monotonic=0.0)
        Advisor(table, zones, config).step(st, 0.0)
    except Exception:  # noqa: BLE001, S110 - warm-up is best effort
        pass


@dataclass
class ServiceParts:
    """What the service is made of, before it runs (see :func:`assemble`)."""

    loop: AdvisoryLoop
    inp: InputLink
    out: OutputPublisher
    recorder: Recorder | None
    table_manager: TableManager | None


def _no_progress(text: str) -> None:
    """Progress sink when nobody listens."""


def assemble(s: RunSettings, progress: Callable[[str], None] = _no_progress) -> ServiceParts:
    """Load files, open the record and make the links (not yet opened).

    ``progress(text)`` is told what start-up waits for (``loading zones``, ``loading
    table``, ``compiling kernels``), for the starting status frames.

    Raises
    ------
    RunError, ValueError
        Bad settings or files (exit code 2); the message names the option and value.
    TransportError
        A bad input or output URL.
    """
    check_settings(s)
    if not Path(s.zones).is_file():
        raise RunError(f"--zones: {s.zones}: no such file")
    progress("loading zones")
    zones = ZoneSet.from_file(s.zones)
    config = load_config(s.config)
    progress("loading table" if s.table else "loading or building the default table")
    table, manager = load_tables(s)
    inp = InputLink(s.input_url)
    fmt = s.input_format or ("stream" if inp.is_stream else "datagram")
    framing = "stream" if inp.is_stream else "datagram"
    if fmt in ("stream", "datagram") and fmt != framing:
        raise RunError(f"--input-format: {fmt} does not fit --input {s.input_url} (a "
                       f"{framing} transport)")
    guard_input(inp, s)
    out = OutputPublisher(s.output_url, max_age_s=1.0 / s.rate_hz)
    progress("loading or building the tables for zones on higher ground")
    advisor = Advisor(manager if manager is not None else table, zones, config,
                      level_tables=None if manager is None else _level_managers(manager))
    # learned levels replace the loaded profile only where they were measured
    advisor.stream_profile = StreamProfile(
        enabled=s.learn_atmosphere,
        base=load_profile(s.profile) if s.learn_atmosphere and s.profile else None)
    progress("compiling kernels")
    warm_up(manager.table if manager is not None else table, zones, config)
    loop = AdvisoryLoop(advisor, input_format=fmt, framing=framing, rate_hz=s.rate_hz,
                        heartbeat_s=s.heartbeat_s, label_map=s.label_map,
                        advisory_version=s.advisory_version)
    recorder = None
    if s.record:
        try:
            recorder = Recorder(s.record, max_bytes=int(s.record_max_mb * 1e6),
                                keep=s.record_keep)
        except OSError as exc:
            raise RunError(f"--record: {s.record}: cannot open ({exc.strerror})") from None
    loop.recorder = recorder
    return ServiceParts(loop, inp, out, recorder, manager)


__all__ = ["ServiceParts", "assemble", "load_tables", "warm_up"]
