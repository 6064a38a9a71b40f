"""Every termination signal ends ``boom-advisory run`` with final frames and exit 0.

Real subprocess, real UDP on 127.0.0.1, bounded waits. Expected behaviour:
``docs/interface.md`` section 17.1 (final ``unavailable`` advisory and status frames,
reason ``service stopped (<why>)``) and section 17.7 (SIGTERM, SIGINT, SIGHUP, SIGQUIT,
SIGUSR1, SIGUSR2 all stop the service cleanly; exit code 0 per section 17.5).
"""

from __future__ import annotations

import signal

import pytest

from tests.test_run_e2e import Listener, free_udp_port, start_run, stop, zones_file  # noqa: F401

SIGNALS = ("SIGTERM", "SIGINT", "SIGHUP", "SIGQUIT", "SIGUSR1", "SIGUSR2")


def _running(f) -> bool:
    return f.type == "status" and not f.fields["reason"].startswith("starting")


@pytest.mark.parametrize("name", SIGNALS)
def test_signal_in_steady_state_ends_with_final_frames(name, tmp_path, small_table_path,
                                                       zones_file) -> None:  # noqa: F811
    sig = getattr(signal, name)
    lis = Listener()
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{free_udp_port()}",
                     "--output", lis.url, "--zones", str(zones_file),
                     "--table", str(small_table_path))
    try:
        lis.wait_for(_running, 120.0, "the first status frame of the running service")
        code = stop(proc, sig)
        lis.close()
    finally:
        if proc.poll() is None:
            proc.kill()
    # ICD 17.5: 0 after a clean stop; ICD 17.1: the last frames say unavailable, and why
    assert code == 0, (tmp_path / "run.err").read_text()[-2000:]
    status = [f.fields for _, f in lis.frames if f.type == "status"]
    adv = [f.fields for _, f in lis.frames if f.type == "adv"]
    assert status[-1]["state"] == "unavailable"
    assert status[-1]["reason"] == f"service stopped ({name})"
    assert adv[-1]["status"] == "unavailable"
