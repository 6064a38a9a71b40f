"""Rebuild tables off the hot path when a new atmosphere arrives, and swap atomically.

The live loop keeps advising on the table it has. A new atmosphere (a profile file that
changed, or a profile assembled from the air-data stream) starts a build in a separate
process (one worker, so the loop keeps its core); the finished table is written to a
file, and the loop swaps it in between two steps by calling :meth:`TableManager.poll`.
From the moment a new atmosphere is submitted until the swap, :attr:`stale` is True and
the advisory status says so. The rebuild process checks the new table against direct
tracing at :data:`REBUILD_VERIFY_SAMPLES` off-grid conditions before writing it; a table
short of the budgets of :mod:`advisory.tables.verify` is still swapped in (it is built
for the air now, the old one is not) and :attr:`TableManager.verify_note` says by how
much, which the service's status shows as ``degraded`` (issue 14).

Disk: the manager deletes the table files it wrote once they can no longer be needed: it
keeps the one in force and the one before it (a failed build's file goes at once), and
at :meth:`TableManager.close` it removes the private temporary directory it made (a
``work_dir`` it was given is left in place, with only its own files deleted).
"""

from __future__ import annotations

import dataclasses
import multiprocessing as mp
import os
import shutil
import tempfile
import threading
import time
from dataclasses import replace
from pathlib import Path

from advisory.physics.atmosphere import (
    Atmosphere,
    AtmosphereError,
)
from advisory.physics.profile_file import load_profile
from advisory.tables.build import BuildInputs, build_table_arrays, provenance
from advisory.tables.store import write_table_file
from advisory.tables.table import BoomTable
from advisory.tables.verify import (
    BUDGET_CUTOFF_MACH,
    BUDGET_HALF_WIDTH_REL,
    BUDGET_OVERPRESSURE_REL,
    verify_table,
)

#: Off-grid conditions a rebuilt table is checked at against direct tracing before it is
#: swapped in (:func:`advisory.tables.verify.verify_table`; engineering choice: a few
#: seconds of the rebuild process for the small grids a flight uses).
REBUILD_VERIFY_SAMPLES = 12


def _build_to_file(inputs: BuildInputs, path: str) -> None:
    """Child-process body: build with one worker, verify against direct tracing (the
    report in the header's ``verify``), and write the table file."""
    t0 = time.monotonic()
    arrays = build_table_arrays(inputs, workers=1)
    header = provenance(inputs, time.monotonic() - t0)
    report = verify_table(BoomTable(header, arrays), samples=REBUILD_VERIFY_SAMPLES)
    header["verify"] = {**{k: int(v) if k == "samples" else float(v)
                           for k, v in dataclasses.asdict(report).items()},
                        "within_budget": bool(report.within_budget)}
    write_table_file(path, header, arrays)


def verify_note(table: BoomTable) -> str:
    """What a rebuilt table's verification found, when short of the budgets ("" when it
    holds them or was not verified)."""
    v = table.header.get("verify")
    if not isinstance(v, dict) or v.get("within_budget", True):
        return ""
    return (f"rebuilt table short of its budgets against direct tracing: half-width "
            f"{100 * float(v.get('half_width_rel_max', 0.0)):.1f} % (budget "
            f"{100 * BUDGET_HALF_WIDTH_REL:g} %), overpressure "
            f"{100 * float(v.get('overpressure_rel_max', 0.0)):.1f} % (budget "
            f"{100 * BUDGET_OVERPRESSURE_REL:g} %), cutoff Mach "
            f"{float(v.get('cutoff_abs_max', 0.0)):.4f} (budget {BUDGET_CUTOFF_MACH:g})")


class TableManager:
    """Owns the live table and its rebuilds.

    Parameters
    ----------
    table : BoomTable
        The table to advise on now.
    inputs : BuildInputs
        What ``table`` was built from; a rebuild changes only the atmosphere.
    work_dir : str, optional
        Where rebuilt tables are written (default: a private temporary directory).
    """

    def __init__(self, table: BoomTable, inputs: BuildInputs, work_dir: str | None = None) -> None:
        self._table = table
        self._inputs = inputs
        self._lock = threading.Lock()
        self._proc: mp.process.BaseProcess | None = None
        self._pending_path: str | None = None
        self._pending_atm: Atmosphere | None = None
        self._building_atm: Atmosphere | None = None
        self._own_dir = work_dir is None
        self._work_dir = work_dir or tempfile.mkdtemp(prefix="boom-tables-")
        self._written: list[str] = []  # rebuilt files in force or before it, oldest first
        self._watch: tuple[Path, float] | None = None
        self.rebuilds_done = 0
        self.rebuilds_failed = 0
        self.last_error = ""
        #: The table in force verified short of its budgets (:func:`verify_note`), or "".
        self.verify_note = ""

    @property
    def table(self) -> BoomTable:
        """The table to use for this step (a plain reference read: atomic)."""
        return self._table

    @property
    def inputs(self) -> BuildInputs:
        """What the table being built or in use is built from (the latest atmosphere)."""
        return self._inputs

    @property
    def stale(self) -> bool:
        """True while a newer atmosphere is known but its table is not in use yet."""
        return self._pending_atm is not None

    @property
    def building(self) -> bool:
        """True while a rebuild process runs."""
        return self._proc is not None and self._proc.is_alive()

    def submit_atmosphere(self, atm: Atmosphere) -> None:
        """Start rebuilding for ``atm``; the current table stays in use (flagged stale).

        A submission while a build runs replaces the pending atmosphere; the newest one
        is built when the running build ends.
        """
        with self._lock:
            self._pending_atm = atm
            if not self.building:
                self._start(atm)

    def _start(self, atm: Atmosphere) -> None:
        self._inputs = replace(self._inputs, atmosphere=atm)
        fd, path = tempfile.mkstemp(suffix=".boomtable", dir=self._work_dir)
        os.close(fd)
        self._pending_path = path
        self._building_atm = atm
        ctx = mp.get_context("spawn")
        self._proc = ctx.Process(target=_build_to_file, args=(self._inputs, path), daemon=True)
        self._proc.start()

    def watch_profile_file(self, path: str | Path) -> None:
        """Rebuild whenever the profile file's modification time changes (see :meth:`poll`)."""
        p = Path(path)
        self._watch = (p, p.stat().st_mtime if p.exists() else 0.0)

    def poll(self) -> bool:
        """Call between steps: swap in a finished table; check the watched file.

        Returns True when a new table was swapped in. Never raises: a failed rebuild is
        counted, its reason kept in :attr:`last_error`, and the old table stays.
        """
        swapped = False
        if self._watch is not None:
            p, mtime = self._watch
            try:
                now = p.stat().st_mtime
                if now != mtime:
                    self._watch = (p, now)
                    self.submit_atmosphere(load_profile(p))
            except (OSError, AtmosphereError) as exc:
                self.last_error = f"profile {p}: {exc}"
        proc = self._proc
        if proc is not None and not proc.is_alive():
            proc.join()
            self._proc = None
            path = self._pending_path
            try:
                if proc.exitcode != 0:
                    raise RuntimeError(f"rebuild process exited with code {proc.exitcode}")
                if path is None:  # cannot happen: _start sets it with the process
                    raise RuntimeError("rebuild finished without a table file")
                new = BoomTable.load(path)
                with self._lock:
                    self._table = new  # the atomic swap
                    if self._pending_atm is self._building_atm:
                        self._pending_atm = None
                self.verify_note = verify_note(new)  # in use, but said so (issue 14)
                self.rebuilds_done += 1
                swapped = True
                self._keep_written(path)
            except Exception as exc:  # noqa: BLE001 - the live loop must not die
                # The old table stays in use and stays flagged stale; the same
                # atmosphere is not retried (a newer submission will be).
                self.rebuilds_failed += 1
                self.last_error = str(exc)
                if path is not None:
                    _remove(path)
            with self._lock:
                pending = self._pending_atm
                if pending is not None and pending is not self._building_atm:
                    self._start(pending)
        return swapped

    def _keep_written(self, path: str) -> None:
        """``path`` is in force now: delete rebuilt files older than the one before it."""
        self._written.append(path)
        while len(self._written) > 2:
            _remove(self._written.pop(0))

    def close(self) -> None:
        """Stop a running rebuild, delete the files it wrote (safe to call twice).

        The table in force stays usable: its arrays are loaded already (a file deleted
        while mapped stays readable until unmapped, POSIX ``unlink``).
        """
        proc, self._proc = self._proc, None
        if proc is not None and proc.is_alive():
            proc.terminate()
            proc.join(timeout=5)
        pending, self._pending_path = self._pending_path, None
        for path in [*self._written, *([pending] if pending else [])]:
            _remove(path)
        self._written = []
        if self._own_dir:
            shutil.rmtree(self._work_dir, ignore_errors=True)
            self._own_dir = False


def _remove(path: str) -> None:
    """Delete a file the manager wrote; a file already gone is fine."""
    try:
        os.unlink(path)
    except OSError:
        pass
