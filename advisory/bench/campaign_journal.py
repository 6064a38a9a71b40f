"""A campaign's journal: every finished encounter's record, written as it comes back.

``campaign --out DIR`` appends each encounter's record (the ``ignore`` and ``follow``
``simulate --json`` objects, :func:`advisory.bench.campaign_engine.run_pair`) to
``DIR/records.jsonl`` the moment it completes, one JSON line each, after a header line
naming the campaign. ``campaign --out DIR --resume`` reads it back and flies only the
encounters it does not hold: a campaign of a thousand encounters (hours on a small
machine) survives a stopped session, a reboot or a power cut and can be extended
(``--count`` larger than before: the same first encounters, more after them). The
metrics are computed over every record, read back or flown, as if the campaign had run
at once: encounter ``i`` depends on the seed and ``i`` only
(:mod:`advisory.bench.campaign_sample`).

The header holds what decides a record: the seed, the ``--known`` / ``--spread`` /
``--near-cutoff`` choices, the advisor config file and its contents, the package version
and a SHA-256 of the package's own source files (so advice from other code is never
mixed in). A journal whose header differs is refused with one line naming the first
field that differs. A torn last line (the machine stopped mid-write) is dropped and that
encounter flown again; so are failed encounters (their record carries ``error``).

This module is the bench's; the core never imports it. ADVISORY AID ONLY: not certified
flight software; local regulations and licensed practice govern supersonic flight.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path
from typing import IO, Any

from advisory.schema import VERSION

JOURNAL_NAME = "records.jsonl"
FORMAT = "boom-advisory campaign journal 1"


class JournalError(ValueError):
    """A journal that cannot be resumed (the message names the file and the reason)."""


def code_fingerprint() -> str:
    """SHA-256 (hex) of the package's Python sources, by relative path (no caches)."""
    root = Path(__file__).resolve().parents[1]
    h = hashlib.sha256()
    for path in sorted(root.rglob("*.py")):
        if "__pycache__" in path.parts:
            continue
        h.update(path.relative_to(root).as_posix().encode() + b"\0")
        h.update(path.read_bytes() + b"\0")
    return h.hexdigest()


def campaign_header(seed: int, known: bool, spread: bool, near_cutoff: bool,
                    config: str | None) -> dict[str, Any]:
    """The header line of a campaign's journal (module notes)."""
    config_sha = None
    if config is not None:
        config_sha = hashlib.sha256(Path(config).read_bytes()).hexdigest()
    return {"format": FORMAT, "seed": seed, "known": known, "spread": spread,
            "near_cutoff": near_cutoff, "config": config, "config_sha256": config_sha,
            "package_version": VERSION, "code_sha256": code_fingerprint()}


class Journal:
    """The journal file of one campaign, opened to append (module notes).

    Parameters
    ----------
    path : Path
        ``DIR/records.jsonl``.
    header : dict
        :func:`campaign_header` of the campaign.
    resume : bool
        Read the records of an existing journal with the same header and keep
        appending to it; False starts the journal afresh (an existing one is kept
        beside it as ``records.jsonl.prev``, replacing an older ``.prev``).

    Raises
    ------
    JournalError
        ``resume`` and a journal of another campaign, or a file that is not a journal.
    """

    def __init__(self, path: Path, header: dict[str, Any], resume: bool) -> None:
        self.path = path
        #: finished records read back, by encounter index (failed ones left out)
        self.done: dict[int, dict[str, Any]] = {}
        #: where an earlier journal went when this one started afresh (one kept)
        self.kept_as: Path | None = None
        if resume and path.exists():
            text = path.read_text(encoding="utf-8")
            self.done, kept = self._read(text, header)
            if kept != text:  # a torn last line: drop it before appending
                path.write_text(kept, encoding="utf-8")
            self._file: IO[str] = path.open("a", encoding="utf-8")
        else:
            path.parent.mkdir(parents=True, exist_ok=True)
            if path.exists():  # never thrown away: hours of records may be in it
                self.kept_as = path.with_name(path.name + ".prev")
                path.replace(self.kept_as)
            self._file = path.open("w", encoding="utf-8")
            self._write(header)

    def _read(self, text: str, header: dict[str, Any]
              ) -> tuple[dict[int, dict[str, Any]], str]:
        """The finished records of ``text`` and the text without a torn last line."""
        lines = text.splitlines(keepends=True)
        try:
            first = json.loads(lines[0]) if lines else None
        except json.JSONDecodeError:
            first = None
        if not isinstance(first, dict) or first.get("format") != FORMAT:
            raise JournalError(f"--resume: {self.path} is not a campaign journal")
        for key, want in header.items():
            if first.get(key) != want:
                raise JournalError(f"--resume: {self.path} is of another campaign: {key} "
                                   f"{first.get(key)!r}, this run {want!r}")
        done: dict[int, dict[str, Any]] = {}
        kept = [lines[0]]
        for n, line in enumerate(lines[1:], start=2):
            try:
                rec = json.loads(line)
            except json.JSONDecodeError:
                if n == len(lines):  # the machine stopped mid-write: fly it again
                    break
                raise JournalError(f"--resume: {self.path} line {n} is not JSON") from None
            if n == len(lines) and not line.endswith("\n"):
                break  # written whole but not ended: fly it again all the same
            kept.append(line)
            if isinstance(rec, dict) and "index" in rec and not rec.get("error"):
                done[int(rec["index"])] = rec
        return done, "".join(kept)

    def _write(self, obj: dict[str, Any]) -> None:
        self._file.write(json.dumps(obj, separators=(",", ":")) + "\n")
        self._file.flush()

    def append(self, record: dict[str, Any]) -> None:
        """Write one finished encounter's record (flushed at once)."""
        self._write(record)

    def close(self) -> None:
        """Close the file."""
        self._file.close()
