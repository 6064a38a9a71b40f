"""Tables whose digests are valid but whose contents are wrong are refused on load.

Each defective table is a real (tiny) table whose arrays or header were rewritten and
saved again through the table writer, so every digest in it is valid: only the contents
check can refuse it. Every command that loads a table must exit 2 with one line naming the
array (or header key) and the problem, never crash (a negative return code is a signal:
SIGSEGV / SIGABRT from indexing outside an array) and never advise from the table.

Expectations: exit code 2 for bad input is the project's rule (DEVELOPERS.md, argparse
convention); what a consistent table looks like comes from the table file format
(advisory/tables/store.py module notes, the grid notes in advisory/tables/grid.py).
"""

from __future__ import annotations

import json
import math
import os
import socket
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from advisory import units
from advisory.io.framing import DatagramReader
from advisory.io.messages import decode_frame
from advisory.physics.aircraft import default_aircraft
from advisory.physics.atmosphere import standard_atmosphere
from advisory.tables.build import BuildInputs, build_table_arrays, provenance
from advisory.tables.grid import TableGrid
from advisory.tables.store import TableFileError, read_table_file, write_table_file
from advisory.tables.table import BoomTable

PY = sys.executable
LAT0, LON0 = 40.0, -100.0


def tiny_table(path: Path) -> Path:
    """A real table over a tiny grid (3 altitudes around 45,000 ft, 4 Mach excesses)."""
    grid = TableGrid(altitudes_m=tuple(units.ft_to_m(a) for a in (44000, 45000, 46000)),
                     mach_excess=(0.01, 0.1, 0.5, 1.0), fpa_rad=(0.0,), n_eta=7)
    inputs = BuildInputs(default_aircraft(), standard_atmosphere(), grid)
    write_table_file(path, provenance(inputs, 0.0), build_table_arrays(inputs, workers=1))
    return path


def rewrite(src: Path, dst: Path, arrays_fn=None, header_fn=None) -> Path:
    """Copy a table with its arrays and/or header changed, digests recomputed."""
    header, arrays = read_table_file(src)
    arrays = {k: np.array(v) for k, v in arrays.items()}
    header = {k: v for k, v in header.items()
              if k not in ("arrays", "payload_sha256", "payload_nbytes", "format_version")}
    if arrays_fn is not None:
        arrays = arrays_fn(arrays)
    if header_fn is not None:
        header = header_fn(header)
    write_table_file(dst, header, arrays)
    return dst


def _set(arrays: dict, **changes) -> dict:
    arrays.update(changes)
    return arrays


def _one_altitude(arrays: dict) -> dict:
    for k in ("axis_altitude_m", "cutoff_mach", "phi_left", "phi_right", "cells"):
        arrays[k] = arrays[k][:1]
    return arrays


def _one_altitude_header(header: dict) -> dict:
    header["grid"]["altitudes_m"] = header["grid"]["altitudes_m"][:1]
    return header


def _descending(arrays: dict) -> dict:
    for k in ("axis_altitude_m", "cutoff_mach", "phi_left", "phi_right", "cells"):
        arrays[k] = arrays[k][::-1].copy()
    return arrays


def _no_grid_key(header: dict) -> dict:
    del header["grid"]["n_eta"]
    return header


#: name -> (arrays_fn, header_fn, words the one-line message must contain)
DEFECTS = {
    # shapes that disagree: the lookup would read outside the arrays
    "cells_short_altitude": (lambda a: _set(a, cells=a["cells"][:1].copy()), None,
                             ["cells", "shape"]),
    "cutoff_wrong_shape": (lambda a: _set(a, cutoff_mach=a["cutoff_mach"][:, :, :0].copy()),
                           None, ["cutoff_mach", "shape"]),
    "eta_longer_than_cells": (lambda a: _set(a, axis_eta=np.linspace(-1, 1, 41)), None,
                              ["axis_eta"]),
    "cells_flat": (lambda a: _set(a, cells=a["cells"].reshape(-1).copy()), None,
                   ["cells", "shape"]),
    # values
    "cells_nan": (lambda a: _set(a, cells=np.full_like(a["cells"], np.nan)), None,
                  ["cells", "not finite"]),
    "cutoff_nan": (lambda a: _set(a, cutoff_mach=np.full_like(a["cutoff_mach"], np.nan)),
                   None, ["cutoff_mach", "not finite"]),
    "one_altitude_plane": (_one_altitude, _one_altitude_header, ["altitude", "2"]),
    "altitudes_descending": (_descending, None, ["axis_altitude_m", "ascend"]),
    "cells_int": (lambda a: _set(a, cells=a["cells"].astype(np.int64)), None,
                  ["cells", "float64"]),
    # header
    "grid_key_missing": (None, _no_grid_key, ["grid", "n_eta"]),
    "no_aircraft": (None, lambda h: {k: v for k, v in h.items() if k != "aircraft"},
                    ["aircraft"]),
}


@pytest.fixture(scope="module")
def table_dir(tmp_path_factory) -> Path:
    d = tmp_path_factory.mktemp("bad_tables")
    good = tiny_table(d / "good.boomtable")
    for name, (afn, hfn, _) in DEFECTS.items():
        rewrite(good, d / f"{name}.boomtable", afn, hfn)
    return d


@pytest.fixture(scope="module")
def check_files(tmp_path_factory) -> tuple[Path, Path]:
    d = tmp_path_factory.mktemp("check_files")
    zones = d / "zones.geojson"
    ring = [[LON0 + 0.5, LAT0 - 0.1], [LON0 + 0.7, LAT0 - 0.1], [LON0 + 0.7, LAT0 + 0.1],
            [LON0 + 0.5, LAT0 + 0.1], [LON0 + 0.5, LAT0 - 0.1]]
    zones.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [ring]},
         "properties": {"id": "town", "limit_psf": 0.0}}]}))
    state = d / "state.json"
    state.write_text(json.dumps({"lat_deg": LAT0, "lon_deg": LON0, "alt_ft": 45000.0,
                                 "mach": 1.6, "heading_deg": 90.0, "gs_kt": 900.0,
                                 "bank_deg": 0.0, "fpa_deg": 0.0}))
    return zones, state


def cli(*argv: str, timeout: float = 120.0) -> subprocess.CompletedProcess:
    return subprocess.run([PY, "-m", "advisory.cli", *argv], capture_output=True, text=True,
                          timeout=timeout, env=dict(os.environ))


def assert_refused(proc: subprocess.CompletedProcess, words: list[str]) -> None:
    # Exit 2 and one line naming the problem (project rule: DEVELOPERS.md "Bad input");
    # a negative return code would be a signal (SIGSEGV/SIGABRT).
    lines = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert proc.returncode == 2, (proc.returncode, proc.stderr[-2000:])
    assert len(lines) == 1, proc.stderr
    for w in words:
        assert w.lower() in lines[0].lower(), (w, lines[0])


def test_good_tiny_table_loads(table_dir) -> None:
    # Control: the unaltered table loads (so every refusal below is the defect's).
    t = BoomTable.load(table_dir / "good.boomtable")
    assert t.cells.shape == (3, 4, 1, 1, 7, 9)


@pytest.mark.parametrize("name", sorted(DEFECTS))
def test_defective_table_refused_on_load(table_dir, name) -> None:
    # Digests are valid (the writer recomputed them); the contents check must refuse.
    words = DEFECTS[name][2]
    with pytest.raises(TableFileError) as info:
        BoomTable.load(table_dir / f"{name}.boomtable")
    msg = str(info.value)
    assert "\n" not in msg
    for w in words:
        assert w.lower() in msg.lower(), (w, msg)


@pytest.mark.parametrize("name", ["cells_short_altitude", "cells_nan", "eta_longer_than_cells",
                                  "one_altitude_plane", "grid_key_missing"])
def test_check_command_refuses_bad_table(table_dir, check_files, name) -> None:
    zones, state = check_files
    proc = cli("check", "--state", str(state), "--zones", str(zones), "--table",
               str(table_dir / f"{name}.boomtable"))
    assert_refused(proc, DEFECTS[name][2])


@pytest.mark.parametrize("name", ["cutoff_wrong_shape", "cells_nan", "no_aircraft"])
def test_tables_verify_refuses_bad_table(table_dir, name) -> None:
    proc = cli("tables", "verify", str(table_dir / f"{name}.boomtable"), "--samples", "2")
    assert_refused(proc, DEFECTS[name][2])


def test_tables_info_and_predict_refuse_bad_table(table_dir) -> None:
    path = str(table_dir / "cells_short_altitude.boomtable")
    assert_refused(cli("tables", "info", path), ["cells"])
    assert_refused(cli("predict", "--table", path, "--mach", "1.6", "--altitude-ft", "45000"),
                   ["cells"])


def test_run_with_bad_table_publishes_why_then_exits_2(table_dir, check_files) -> None:
    # The service must say why on its output (an "unavailable" status frame naming the
    # table problem) before it exits 2, so a display does not stay blank (issue 15, High 2).
    zones, _ = check_files
    rx = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    rx.bind(("127.0.0.1", 0))
    rx.settimeout(20.0)
    port = rx.getsockname()[1]
    try:
        proc = cli("run", "--input", "udp://127.0.0.1:0", "--output",
                   f"udp://127.0.0.1:{port}", "--zones", str(zones), "--table",
                   str(table_dir / "cells_nan.boomtable"), "--duration-s", "5")
        assert proc.returncode == 2, proc.stderr[-2000:]
        frames = []  # starting frames first (ICD 17.7), then the one saying why it stopped
        rx.settimeout(1.0)
        while True:
            try:
                frames += [decode_frame(p) for p in DatagramReader().feed(rx.recv(8192))]
            except TimeoutError:
                break
    finally:
        rx.close()
    assert frames
    frame = frames[-1]
    assert frame.type == "status"
    assert frame.fields["state"] == "unavailable"
    assert frame.fields["reason"].startswith("service stopped (start failed")
    assert "cells" in frame.fields["reason"]


def test_loaded_table_arrays_are_consistent_for_the_lookup(table_dir) -> None:
    # After the check, every index the lookup can form is inside the arrays:
    # cells[a, m, f, h, e, q] with a < n_alt etc. (the kernel's contract, lookup.py).
    t = BoomTable.load(table_dir / "good.boomtable")
    n = (t.ax_alt.size, t.ax_mex.size, t.ax_fpa.size, t.ax_hdg.size, t.eta.size)
    assert t.cells.shape[:5] == n and t.cutoff.shape == (n[0], n[2], n[3])
    fp = t.footprint(units.ft_to_m(45000.0), 1.6)
    assert fp.reaches_ground and np.all(np.isfinite(fp.rows))
    assert math.isfinite(fp.cutoff_mach)


def test_replay_refuses_bad_table_and_missing_table(table_dir, tmp_path) -> None:
    # A bundled demo flight replayed against a defective table: exit 2, one line.
    log = Path(__file__).resolve().parent.parent / "replay_logs" / "below_cutoff"
    assert_refused(cli("replay", str(log), "--table",
                       str(table_dir / "cells_short_altitude.boomtable")), ["cells", "shape"])
    assert_refused(cli("replay", str(log), "--table", str(tmp_path / "absent.boomtable")),
                   ["absent.boomtable"])


def test_table_without_atmosphere_arrays_needs_a_usable_description(table_dir, tmp_path) -> None:
    # A table may omit the atm_* arrays (its atmosphere is then rebuilt from the header's
    # description, store.py notes); a description that cannot be rebuilt is refused.
    def drop_atm(a: dict) -> dict:
        return {k: v for k, v in a.items() if not k.startswith("atm_")}

    ok = rewrite(table_dir / "good.boomtable", tmp_path / "no_atm.boomtable", drop_atm)
    assert BoomTable.load(ok).atmosphere().z_m.size > 2
    bad = rewrite(table_dir / "good.boomtable", tmp_path / "bad_desc.boomtable", drop_atm,
                  lambda h: dict(h, atmosphere={"kind": "profile", "levels": [[1, 2]]}))
    with pytest.raises(TableFileError, match="header atmosphere"):
        BoomTable.load(bad)


def test_run_with_bad_table_exits_even_if_output_fifo_has_no_reader(table_dir,
                                                                     check_files,
                                                                     tmp_path) -> None:
    # Opening a FIFO for writing blocks until a reader comes; announcing the refusal on
    # such an output must not hold the exit (bounded by the subprocess timeout).
    zones, _ = check_files
    fifo = tmp_path / "display.fifo"
    os.mkfifo(fifo)
    proc = cli("run", "--input", "udp://127.0.0.1:0", "--output", f"file://{fifo}",
               "--zones", str(zones), "--table", str(table_dir / "cells_nan.boomtable"),
               timeout=60.0)
    assert proc.returncode == 2, proc.stderr[-2000:]
    assert "cells" in proc.stderr.splitlines()[-1]
