"""The body of the benchmark's cold-start process: import the package, load the table,
build the advisor, step once, and print when that first advisory came and the peak
resident memory (one JSON line).

Run as ``python -c`` by :func:`advisory.bench.sections_live.section_startup`
(:data:`CHILD_CODE`). It imports only what a service needs to give its first advisory,
so that the figure is the start-up of the advisor and not of the benchmark.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import contextlib
import json
import resource
import sys
import time
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from advisory.bench.workload import (
    CRUISE_MACH,
    FRAME_RATE_HZ,
    cruise_fields,
    cruise_ground_speed_kt,
    make_advisor,
)
from advisory.pipeline.state import AirDataState
from advisory.pipeline.zones import ZoneSet
from advisory.tables import lookup as lk
from advisory.tables.table import BoomTable

#: What the child process runs (``python -c CHILD_CODE TABLE ZONES``).
CHILD_CODE = ("import sys; from advisory.bench.coldstart import coldstart_child; "
              "sys.exit(coldstart_child())")


def _exc_text(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    text = f"{type(exc).__name__}: {text}" if text else type(exc).__name__
    return text if len(text) <= 160 else text[:157] + "..."


def coldstart_child(argv: Sequence[str] | None = None) -> int:
    """Body of the cold-start subprocess (``python -c``): prints one JSON line.

    Imports the package, loads the table, builds an :class:`Advisor` and steps once
    (or, when the advisor is missing, makes one footprint lookup and says so), then
    reports ``time.monotonic()`` at that first answer and the peak resident memory
    after a few more steps.
    """
    argv = list(sys.argv[1:] if argv is None else argv)
    table_path, zones_path = argv[0], argv[1]
    out: dict[str, Any] = {"what": None}
    try:
        table = BoomTable.load(table_path)
        adv = None
        try:
            adv = make_advisor(table, ZoneSet.from_file(zones_path))
            gs = cruise_ground_speed_kt()
            st = AirDataState.from_fields(cruise_fields(0.0, gs), utc_s=time.time(),
                                          rx_monotonic=time.monotonic())
            adv.step(st)
            out["t_first"] = time.monotonic()
            out["what"] = "advisory"
            for i in range(1, 21):
                adv.step(AirDataState.from_fields(cruise_fields(i / FRAME_RATE_HZ, gs),
                                                  utc_s=time.time(),
                                                  rx_monotonic=time.monotonic()))
        except Exception as exc:
            if out["what"] is not None:
                raise
            out["advisor_error"] = _exc_text(exc)
            buf = np.zeros((table.eta.size, lk.N_QUANTITIES))
            table.footprint_into(buf, 15240.0, CRUISE_MACH, 0.0, 0.0)
            out["t_first"] = time.monotonic()
            out["what"] = "footprint"
    except Exception as exc:
        out["error"] = _exc_text(exc)
    out["rss_peak_kb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    with contextlib.suppress(OSError):
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                out["vmhwm_kb"] = int(line.split()[1])
    print(json.dumps(out), flush=True)
    return 0
