"""The C binding's UDP examples drive a real ``run`` and read what it publishes.

``bindings/c/example_udp_sender`` sends air-data datagrams (``docs/interface.md`` section
10) to a ``run`` bound to 127.0.0.1, from one socket, paced in real time, signed with
HMAC-SHA256 when given a key file (section 7.1);
``bindings/c/example_udp_receiver`` binds the service's output address and decodes the
advisory and status frames. Expected behaviour: the interface document (sections 5, 6,
17.1: one advisory per step, a status at least every second, the invented zone ahead
named in the advisories; common practice, no source). Loopback only, every wait bounded.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import time
from pathlib import Path

import pytest

from advisory.schema import CONFLICT_STATUSES
from tests.test_run_e2e import READY_TIMEOUT_S, end_run, free_udp_port, square, start_run, stop

ROOT = Path(__file__).resolve().parent.parent
C_DIR = ROOT / "bindings" / "c"
KEY = bytes(range(100, 140))  # invented, 40 bytes
#: The C sender's flight (example_udp_sender.c): 40 N 100 W, east, Mach 1.4, 45,000 ft.
LAT0, LON0, M_PER_DEG_LON = 40.0, -100.0, 111320.0 * 0.766044443118978

pytestmark = pytest.mark.skipif(
    shutil.which("make") is None or shutil.which("cc") is None,
    reason="needs make and a C compiler (cc) to build bindings/c")


@pytest.fixture(scope="module")
def cbuild(c_build) -> Path:
    """The session's build of bindings/c (tests/conftest.py)."""
    return c_build


@pytest.mark.parametrize("signed", [False, True], ids=["plain", "hmac"])
def test_c_sender_drives_run_and_c_receiver_decodes(cbuild, tmp_path, small_table_path,
                                                    signed) -> None:
    zones = tmp_path / "zones.geojson"  # an invented town 60 km ahead of the C flight
    zones.write_text(json.dumps({"type": "FeatureCollection", "features": [
        square("eastfield", LAT0, LON0 + 60e3 / M_PER_DEG_LON)]}))
    port_in, port_out = free_udp_port(), free_udp_port()
    extra: list[str] = []
    key_args: list[str] = []
    if signed:
        key = tmp_path / "link.key"
        key.write_text(KEY.hex() + "\n")
        extra, key_args = ["--auth-key", str(key)], [str(key)]
    receiver = subprocess.Popen(
        [str(cbuild / "example_udp_receiver"), "127.0.0.1", str(port_out), "600"],
        stdout=open(tmp_path / "rx.out", "w"), stderr=subprocess.STDOUT)
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{port_in}", "--output",
                     f"udp://127.0.0.1:{port_out}", "--zones", str(zones), "--tables",
                     str(small_table_path), *extra)
    try:
        # wait (bounded) for the running service's first status frame at the C
        # receiver (the starting frames come first, ICD 17.1)
        waited = 0.0
        while not any(x.startswith("status ") and " starting" not in x
                      for x in (tmp_path / "rx.out").read_text().splitlines()):
            assert proc.poll() is None, (tmp_path / "run.err").read_text()
            assert waited < READY_TIMEOUT_S, "no status frame from run"
            time.sleep(0.2)
            waited += 0.2
        tx = subprocess.run([str(cbuild / "example_udp_sender"), "127.0.0.1", str(port_in),
                             "5", "20", *key_args], capture_output=True, text=True,
                            timeout=30)
        assert tx.returncode == 0, tx.stderr
        assert tx.stdout.split() == ["sent", "100"]
        code = stop(proc)
    finally:
        end_run(proc)
        receiver.terminate()
        receiver.wait(10)
    assert code == 0, (tmp_path / "run.err").read_text()
    lines = (tmp_path / "rx.out").read_text().splitlines()
    adv = [x.split() for x in lines if x.startswith("adv ")]
    status = [x.split() for x in lines if x.startswith("status ")]
    assert not [x for x in lines if x.startswith("bad ")]
    # ICD 5 and 17.1: advisories name the zone ahead while the C sender flies
    named = [a for a in adv if a[2] in CONFLICT_STATUSES and a[3] == "eastfield"]
    assert len(named) >= 10, lines[-20:]  # 50 steps of 10 Hz; slack for a cold start
    assert float(named[0][4]) > 0.0  # time to contact, s
    # ICD 6: status frames decoded; the last ones say the service stopped
    assert len(status) >= 4 and status[-1][2] == "unavailable"
    assert adv[-1][2] == "unavailable"
    assert "Traceback" not in (tmp_path / "run.err").read_text()
