"""What a benchmark ran on (CPU, cores, RAM, Python, numpy, numba, OS, load) and pinning
the one-core sections to the idlest CPU.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import contextlib
import os
import platform
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numba
import numpy


def machine_info() -> dict[str, Any]:
    """What the run ran on: CPU model, cores, RAM, Python, numpy, numba, OS, load."""
    info: dict[str, Any] = {"cpu": "unknown"}
    with contextlib.suppress(OSError):
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.lower().startswith(("model name", "hardware", "processor\t: ")):
                value = line.split(":", 1)[1].strip()
                if value and not value.isdigit():
                    info["cpu"] = value
                    break
    info["cores"] = os.cpu_count() or 1
    if hasattr(os, "sched_getaffinity"):
        info["cores_usable"] = len(os.sched_getaffinity(0))
    with contextlib.suppress(OSError, ValueError, IndexError):
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemTotal:"):
                info["ram_gib"] = round(int(line.split()[1]) / 1024**2, 1)
    info["python"] = platform.python_version()
    info["numpy"] = numpy.__version__
    info["numba"] = numba.__version__
    os_name = platform.platform()
    with contextlib.suppress(OSError):
        for line in Path("/etc/os-release").read_text().splitlines():
            if line.startswith("PRETTY_NAME="):
                os_name = f"{line.split('=', 1)[1].strip(chr(34))}, {platform.platform()}"
    info["os"] = os_name
    if hasattr(os, "getloadavg"):
        info["load_average_at_start"] = [round(x, 2) for x in os.getloadavg()]
    return info


def machine_lines(m: dict[str, Any]) -> list[str]:
    """:func:`machine_info` as a few readable lines."""
    cores = f"{m.get('cores')} cores"
    if m.get("cores_usable", m.get("cores")) != m.get("cores"):
        cores += f" ({m['cores_usable']} usable)"
    lines = [f"{m.get('cpu')}, {cores}, {m.get('ram_gib', '?')} GiB RAM",
             f"Python {m.get('python')}, numpy {m.get('numpy')}, numba {m.get('numba')}",
             f"{m.get('os')}"]
    if "load_average_at_start" in m:
        la = m["load_average_at_start"]
        lines.append(f"load average at start {la[0]} {la[1]} {la[2]} (shared machine: "
                     "other work inflates the figures)")
    return lines


def _idlest_cpu(cpus: set[int], window_s: float = 0.25) -> int:
    """The CPU of ``cpus`` with the most idle time over ``window_s`` (from /proc/stat)."""
    def idle() -> dict[int, int]:
        out = {}
        with contextlib.suppress(OSError, ValueError, IndexError):
            for line in Path("/proc/stat").read_text().splitlines():
                name = line.split(" ", 1)[0]
                if name.startswith("cpu") and name[3:].isdigit():
                    f = line.split()
                    out[int(name[3:])] = int(f[4]) + int(f[5])  # idle + iowait
        return out

    a = idle()
    time.sleep(window_s)
    b = idle()
    scored = [(b[c] - a[c], c) for c in cpus if c in a and c in b]
    return max(scored)[1] if scored else max(cpus)


@contextlib.contextmanager
def one_core() -> Iterator[str]:
    """Pin this process to its idlest CPU for the block (Linux); yields what was done.

    The sections that must run "on one core" use it, so that nothing they start can
    spread to a second core, and so that they do not share a core with other work.
    """
    if not hasattr(os, "sched_setaffinity"):
        yield "not pinned (no sched_setaffinity)"
        return
    before = os.sched_getaffinity(0)
    cpu = _idlest_cpu(before)
    try:
        os.sched_setaffinity(0, {cpu})
    except OSError:
        yield "not pinned"
        return
    try:
        yield f"pinned to CPU {cpu} (the idlest)"
    finally:
        os.sched_setaffinity(0, before)
