"""Operations: what an integrator asks of the command line.

Expected values: the project's interface document (``docs/interface.md`` section 17.7)
and the package version in ``advisory/schema.py`` (one home; pyproject reads it).
"""

from __future__ import annotations

import hashlib
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import msgpack

import advisory
from advisory.io.records import KIND_EVENT, KIND_OUTPUT, decode_event, read_records
from advisory.schema import SAFETY_CAUTION, VERSION
from advisory.tables.cache import cache_dir
from tests.test_run_e2e import Listener, free_udp_port, start_run, stop, zones_file  # noqa: F401


def test_version_prints_the_version_and_the_caution() -> None:
    # ICD 17.7: `boom-advisory --version` prints the version and the caution, exit 0
    res = subprocess.run([sys.executable, "-m", "advisory.cli", "--version"],
                         capture_output=True, text=True, timeout=60)
    assert res.returncode == 0, res.stderr
    assert res.stdout.splitlines()[0] == f"boom-advisory {VERSION}"
    assert SAFETY_CAUTION in res.stdout


def _read_only_copy(tmp_path: Path) -> Path:
    """A copy of the package whose cache directories cannot be made: every
    ``__pycache__`` is a plain file (works as root too, where permissions do not bind)."""
    root = tmp_path / "site"
    shutil.copytree(Path(advisory.__file__).parent, root / "advisory",
                    ignore=shutil.ignore_patterns("__pycache__"))
    for d in [root / "advisory", *(p for p in (root / "advisory").rglob("*") if p.is_dir())]:
        (d / "__pycache__").write_text("not a directory\n")
    return root


def test_read_only_install_without_numba_cache_dir_falls_back(tmp_path) -> None:
    # the operations list: a read-only install must not crash at import; the
    # CRC-32C of "123456789" is 0xE3069283 (RFC 3720 check value; value from memory)
    root = _read_only_copy(tmp_path)
    blocked = tmp_path / "blocked"
    blocked.write_text("a file, so nothing can be made under it\n")
    env = {k: v for k, v in os.environ.items() if k != "NUMBA_CACHE_DIR"}
    env.update(PYTHONPATH=str(root), HOME=str(blocked / "home"),
               XDG_CACHE_HOME=str(blocked / "xdg"), TMPDIR=str(tmp_path / "tmp"))
    (tmp_path / "tmp").mkdir()
    res = subprocess.run([sys.executable, "-c", "from advisory.io.crc32c import crc32c; "
                          "print(hex(crc32c(b'123456789')))"], capture_output=True,
                         text=True, env=env, cwd=tmp_path, timeout=300)
    assert res.returncode == 0, res.stderr[-2000:]
    assert res.stdout.strip() == "0xe3069283"
    notices = [ln for ln in res.stderr.splitlines() if "notice" in ln]
    assert len(notices) == 1 and str(tmp_path / "tmp") in notices[0], res.stderr
    assert list((tmp_path / "tmp" / "boom-advisory" / "numba").rglob("*.nbi"))


def test_service_config_unknown_key_is_one_line_and_exit_2(tmp_path) -> None:
    # ICD 17.7: unknown keys refused with one line naming the key, exit code 2 (17.5)
    cfg = tmp_path / "service.toml"
    cfg.write_text('input = "udp://127.0.0.1:9"\nrate_hz = 20\n')
    res = subprocess.run([sys.executable, "-m", "advisory.cli", "run", "--service-config",
                          str(cfg), "--output", "udp://127.0.0.1:9", "--zones", "z"],
                         capture_output=True, text=True, timeout=60)
    assert res.returncode == 2
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "unknown key 'rate_hz'" in lines[0], res.stderr


def test_advisory_version_other_than_1_or_2_is_one_line_and_exit_2() -> None:
    # ICD section 7: a service sends version 2, or 1 for older receivers; nothing else
    res = subprocess.run([sys.executable, "-m", "advisory.cli", "run", "--input",
                          "udp://127.0.0.1:9", "--output", "udp://127.0.0.1:9", "--zones", "z",
                          "--advisory-version", "3"], capture_output=True, text=True,
                         timeout=60)
    assert res.returncode == 2
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "--advisory-version: 3" in lines[0], res.stderr


def test_service_config_runs_and_the_command_line_overrides_it(
        tmp_path, small_table_path, zones_file) -> None:  # noqa: F811
    # ICD 17.7: every run option may come from the file; a command-line option wins
    lis = Listener()
    unused = free_udp_port()
    (tmp_path / "z.geojson").write_text(zones_file.read_text())
    cfg = tmp_path / "service.toml"
    cfg.write_text(f'input = "udp://127.0.0.1:{free_udp_port()}"\n'
                   f'output = "udp://127.0.0.1:{unused}"\n'
                   'zones = "z.geojson"\n'  # relative to the file's folder
                   f'table = "{small_table_path}"\n'
                   'record = "run.boomrec"\n'
                   'rate-hz = 20\n'
                   'advisory-version = 1\n'  # for an older receiver (ICD section 7)
                   'duration-s = 4\n')
    res = subprocess.run([sys.executable, "-m", "advisory.cli", "run", "--service-config",
                          str(cfg), "--output", lis.url], capture_output=True, text=True,
                         cwd="/", timeout=300)
    lis.close()
    assert res.returncode == 0, res.stderr[-2000:]
    adv = [f for _, f in lis.frames if f.type == "adv"]
    # 20 Hz from the file for about 4 s (loose: a loaded machine misses steps)
    assert len(adv) >= 30, len(adv)
    # the start event names what ran: version and SHA-256 digests (hashlib, FIPS 180-4)
    records, _ = read_records(tmp_path / "run.boomrec")
    start = [e for e in (decode_event(r.data) for r in records if r.kind == KIND_EVENT)
             if e.code == "start"][0]
    ident = start.fields["settings"]["identity"]
    # version-1 advisory frames for an older receiver, as the file asked (ICD section 7),
    # and the start event says so (a replay sends the same)
    assert start.fields["settings"]["advisory_version"] == 1
    sent = [msgpack.unpackb(r.data) for r in records if r.kind == KIND_OUTPUT]
    adv_v = {m["v"] for m in sent if m["type"] == "adv"}
    assert adv_v == {1}, adv_v
    assert ident["sw"] == VERSION
    assert ident["table_sha"] == hashlib.sha256(small_table_path.read_bytes()).hexdigest()[:16]
    assert ident["zones_sha"] == hashlib.sha256(zones_file.read_bytes()).hexdigest()[:16]
    # ... and every status frame of the running service carries the same identity on the
    # bus (ICD section 6), so an integrator sees what runs without reading the record
    running = [f.fields for _, f in lis.frames if f.type == "status"
               and not str(f.fields.get("reason", "")).startswith("starting")]
    assert running and all(
        st.get("sw") == VERSION and st.get("table_sha") == ident["table_sha"]
        and st.get("zones_sha") == ident["zones_sha"] for st in running), running[:2]
    # ... with the table's range (issue 14, item 5): the small table's grid
    # (tests/conftest.py small_grid: 42,000-48,000 ft, level, Mach excess up to 2.0)
    assert all(st.get("table_range") == "42000-48000ft 0deg +2.00M" for st in running)


def test_invalid_profile_written_while_running_is_reported(tmp_path, small_table_path,
                                                          zones_file) -> None:  # noqa: F811
    # the issue: an invalid --profile file written while running was ignored silently.
    # ICD 17.2/17.3/17.7: counted (profile_rejected), one log line, status degraded with
    # the reason; the previous table stays (advisories keep flowing)
    profile = tmp_path / "day.csv"  # an invented warm day, no wind
    profile.write_text("alt_ft,temp_c\n0,25\n36000,-50\n60000,-52\n")
    lis = Listener()
    proc = start_run(tmp_path, "--input", f"udp://127.0.0.1:{free_udp_port()}",
                     "--output", lis.url, "--zones", str(zones_file), "--table",
                     str(small_table_path), "--profile", str(profile))
    try:
        lis.wait_for(lambda f: f.type == "adv", 120.0, "the first advisory", after=0.0)
        time.sleep(0.3)
        profile.write_text("alt_ft,temp_c\nbanana,hot\n")
        os.utime(profile, (time.time() + 5, time.time() + 5))  # a new modification time
        _, st = lis.wait_for(lambda f: f.type == "status"
                             and f.fields["counters"].get("profile_rejected", 0) >= 1,
                             20.0, "a status counting the refused profile")
        assert stop(proc) == 0
    finally:
        if proc.poll() is None:
            proc.kill()
        lis.close()
    assert st.fields["state"] in ("degraded", "unavailable")
    assert "profile refused" in st.fields["reason"] or st.fields["state"] == "unavailable"
    err = (tmp_path / "run.err").read_text().splitlines()
    lines = [ln for ln in err if "profile refused" in ln]
    assert len(lines) == 1 and "warning" in lines[0], lines
    adv = [f for _, f in lis.frames if f.type == "adv"]
    assert len(adv) > 5  # the service kept advising


def test_unwritable_table_cache_falls_back_with_a_notice(tmp_path, monkeypatch,
                                                         capsys) -> None:
    # the operations list: an unwritable table cache gave a traceback; now the
    # user's cache, then the temporary directory, with one notice line (common practice,
    # no source)
    blocked = tmp_path / "blocked"
    blocked.write_text("a file, so nothing can be made under it\n")
    monkeypatch.setenv("BOOM_ADVISORY_CACHE", str(blocked / "tables"))
    monkeypatch.setenv("HOME", str(blocked / "home"))
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    assert cache_dir() == tmp_path / "boom-advisory"
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "notice" in err[0] and str(blocked / "tables") in err[0]
