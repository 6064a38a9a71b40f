"""``boom-advisory warm``: compile every kernel the service uses, before it starts.

The first start on a machine (or after an upgrade) compiles the numba kernels, tens of
seconds; the sample systemd unit runs this command first (``ExecStartPre``), so the
service itself starts in about a second. It imports every module of the package that
compiles kernels, loads the table (or builds the default one, cached, as ``run`` would)
and drives the service's loop through a few steps of an invented flight toward an
invented zone over both framings, so every kernel the live path calls is compiled for
the argument types it calls it with, and kept in numba's cache (``advisory/jit.py``).
"""

from __future__ import annotations

import argparse
import importlib
import json
import time

from advisory import units
from advisory.cli.options import add_aircraft_option, add_table_option
from advisory.io.framing import datagram, frame_stream
from advisory.io.messages import encode_air
from advisory.jit import PACKAGE_DIR
from advisory.physics.atmosphere import standard_atmosphere
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import AdvisorConfig
from advisory.pipeline.zones import ZoneSet
from advisory.schema import SAFETY_CAUTION
from advisory.service.loop import AdvisoryLoop
from advisory.tables.cache import default_table
from advisory.tables.table import BoomTable

#: Parts of the package whose kernels the service never calls (tools around the core).
_NOT_SERVICE = ("advisory.bench", "advisory.cli")


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory warm``."""
    p = sub.add_parser(
        "warm", help="compile every kernel the service uses (run before the service)",
        description="Compile and cache every numba kernel the live service calls, and "
                    "build the default table if needed, so `run` starts quickly. "
                    + SAFETY_CAUTION)
    add_aircraft_option(p)
    add_table_option(p)
    p.set_defaults(func=warm_command)


def _kernel_modules() -> list[str]:
    """Names of the package's modules that compile kernels (through advisory.jit)."""
    names = []
    for path in sorted(PACKAGE_DIR.rglob("*.py")):
        if b"from advisory.jit import" in path.read_bytes():
            rel = path.relative_to(PACKAGE_DIR.parent).with_suffix("")
            name = ".".join(rel.parts)
            if not name.startswith(_NOT_SERVICE):
                names.append(name)
    return names


def _zone_ahead(lat: float, lon: float) -> dict:
    """An invented square zone 1.5 degrees north of (lat, lon), GeoJSON."""
    c = lat + 1.5
    ring = [[lon - 0.1, c - 0.1], [lon + 0.1, c - 0.1], [lon + 0.1, c + 0.1],
            [lon - 0.1, c + 0.1], [lon - 0.1, c - 0.1]]
    return {"type": "FeatureCollection", "features": [{
        "type": "Feature", "geometry": {"type": "Polygon", "coordinates": [ring]},
        "properties": {"id": "warm-up", "name": "warm-up", "limit_psf": 0.0,
                       "margin_km": 0.0}}]}


def warm_command(args: argparse.Namespace) -> int:
    """``warm``: compile, cache, report; exit 0."""
    print(SAFETY_CAUTION)
    t0 = time.monotonic()
    for name in _kernel_modules():
        importlib.import_module(name)
    table = BoomTable.load(args.table) if args.table else default_table(args.aircraft)
    alt = float(table.ax_alt[len(table.ax_alt) // 2])
    mach = table.cutoff_mach(alt) + 0.3
    gs_kt = mach * float(standard_atmosphere().at(alt).sound_speed_mps) / units.KT
    zones = ZoneSet.from_geojson(_zone_ahead(40.0, -100.0), "warm-up zone")
    for framing, wrap in (("datagram", datagram), ("stream", frame_stream)):
        loop = AdvisoryLoop(Advisor(table, zones, AdvisorConfig()), input_format=framing)
        for k in range(12):
            t = k * 0.1
            fields = {"lat_deg": 40.0 + t * 0.005, "lon_deg": -100.0, "alt_ft":
                      units.m_to_ft(alt), "mach": mach, "heading_deg": 0.0, "gs_kt": gs_kt,
                      "bank_deg": 5.0 if k > 6 else 0.0, "fpa_deg": 0.0}
            loop.feed(wrap(encode_air(fields, k, 1.0e9 + t)), 100.0 + t, 1.0e9 + t)
            loop.poll(100.0 + t, 1.0e9 + t)
    print(json.dumps({"kernel_modules": len(_kernel_modules()),
                      "seconds": round(time.monotonic() - t0, 1)}))
    return 0


__all__ = ["add_parser", "warm_command"]
