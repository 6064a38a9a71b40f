"""The air-data feed as an avionics source sends it: frames, timing, noise and faults.

:class:`FeedEncoder` turns each true sample of the flight simulator
(:mod:`advisory.bench.flight`) into what a receiver would get: an air-data frame
(``docs/interface.md``; COBS + CRC-32C + 0x00 on a stream, or one datagram with its CRC)
with the receive time a live service would stamp (sample time plus latency plus uniform
jitter, never before the previous frame), measurement noise, and the faults of the
scenario:

``dropout``  nothing received;
``garbage``  random bytes before every third frame (a separate datagram on UDP);
``bad_crc``  one byte of the frame damaged;
``nan``      the frame's Mach is NaN;
``torn``     only the first half of every frame;
``frozen``   the source repeats the last values it had before the fault (a stuck
             sensor), with advancing sequence numbers and times;
``torn_tail`` (record files only) the file ends in half a record, as after a power cut.

:func:`write_record` writes the received chunks as a record file
(:mod:`advisory.io.records`) that ``boom-advisory replay`` plays. The random draws
(jitter, garbage) follow one seeded generator in sample order, and noise has its own
generator, so a feed without noise gives the same bytes as the demo flights always had.

ADVISORY AID ONLY: not certified flight software; local regulations and licensed
practice govern supersonic flight.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from advisory.io.crc32c import crc32c
from advisory.io.framing import datagram, frame_stream
from advisory.io.messages import encode_air
from advisory.io.records import (
    HEADER,
    KIND_EVENT,
    KIND_RAW_INPUT,
    MAGIC,
    VERSION,
    Recorder,
    encode_event,
    encode_record,
)

Chunk = tuple[float, float, bytes]  #: (receive monotonic s, receive UTC s, bytes)

FAULT_KINDS = ("dropout", "garbage", "bad_crc", "nan", "torn", "frozen")
#: Noise keys: sample field -> standard deviation field of :class:`FeedSettings`.
NOISE_FIELDS = ("mach", "alt_ft", "heading_deg")


@dataclass(frozen=True)
class Fault:
    """Something wrong with the feed for samples with ``t0_s <= t < t1_s`` (s of flight);
    ``kind`` one of :data:`FAULT_KINDS` (or ``torn_tail``, which ignores the times)."""

    kind: str
    t0_s: float = 0.0
    t1_s: float = 0.0


@dataclass(frozen=True)
class FeedSettings:
    """How the source sends (``[source]`` of a scenario file, SI/edge units as named).

    ``noise`` maps :data:`NOISE_FIELDS` to standard deviations (Mach, ft, deg).
    """

    rate_hz: float = 20.0
    format: str = "stream"
    latency_s: float = 0.004
    jitter_s: float = 0.003
    noise: dict[str, float] = field(default_factory=dict)
    faults: tuple[Fault, ...] = ()
    #: Whether the source sends the flight-guidance targets the crew has selected
    #: (``selected_alt_ft``, ``selected_heading_deg``, ``selected_mach``).
    targets: bool = False


class FeedEncoder:
    """Encodes samples into received chunks (see the module notes).

    Parameters
    ----------
    settings : FeedSettings
    seed : int
        Seeds the jitter/garbage generator and (separately) the noise generator.
    mono_start_s, start_utc_s : float
        The receiver's monotonic clock and the UTC time at flight time 0.
    """

    def __init__(self, settings: FeedSettings, seed: int, mono_start_s: float,
                 start_utc_s: float) -> None:
        self.settings = settings
        self.rng = np.random.default_rng(seed)
        self.noise_rng = np.random.default_rng([int(seed), 1])
        self.mono_start_s = float(mono_start_s)
        self.start_utc_s = float(start_utc_s)
        self.rx_prev = -math.inf
        self.frozen: dict[str, float] | None = None
        self.last: dict[str, float] | None = None  #: the values last sent (not frozen)
        self.counts = {"frames": 0, "garbage_chunks": 0, "dropped": 0, "bad_crc": 0, "nan": 0,
                       "torn": 0}
        self._wrap = frame_stream if settings.format == "stream" else datagram

    def fault_at(self, t: float) -> str | None:
        """The fault acting at flight time ``t`` (the first that covers it), if any."""
        for f in self.settings.faults:
            if f.t0_s <= t < f.t1_s:
                return f.kind
        return None

    def _fields(self, sample: dict[str, float], fault: str | None) -> dict[str, float]:
        fields = {k: v for k, v in sample.items() if k != "t_s"}
        if fault == "frozen":
            if self.frozen is None:
                self.frozen = self.last if self.last is not None else fields
            return dict(self.frozen)
        self.frozen = None
        for key in NOISE_FIELDS:
            sd = float(self.settings.noise.get(key, 0.0))
            if sd > 0.0:
                fields[key] = fields[key] + float(self.noise_rng.normal(0.0, sd))
        if "heading_deg" in fields:
            fields["heading_deg"] = fields["heading_deg"] % 360.0
        self.last = dict(fields)
        return fields

    def encode(self, sample: dict[str, float], seq: int) -> list[Chunk]:
        """The chunks received for one sample (none in a dropout)."""
        t = sample["t_s"]
        utc = self.start_utc_s + t
        s = self.settings
        rx = self.mono_start_s + t + s.latency_s + float(self.rng.uniform(0.0, s.jitter_s))
        rx = max(rx, self.rx_prev + 1e-4)
        self.rx_prev = rx
        rx_utc = utc + (rx - self.mono_start_s - t)
        fault = self.fault_at(t)
        if fault == "dropout":
            self.counts["dropped"] += 1
            return []
        fields = self._fields(sample, fault)
        if fault == "nan":
            fields["mach"] = math.nan
            self.counts["nan"] += 1
        data = self._wrap(encode_air(fields, seq & 0xFFFFFFFF, utc))
        out: list[Chunk] = []
        if fault == "bad_crc":
            b = bytearray(data)
            b[len(b) // 2] ^= 0x5A if b[len(b) // 2] not in (0x00, 0x5A) else 0x01
            data = bytes(b)
            self.counts["bad_crc"] += 1
        elif fault == "torn":
            data = data[: len(data) // 2]
            self.counts["torn"] += 1
        elif fault == "garbage" and seq % 3 == 0:
            noise = self.rng.integers(0, 256, size=int(self.rng.integers(8, 90)),
                                      dtype=np.uint8).tobytes()
            if s.format == "stream":
                data = noise + data
            else:
                out.append((rx, rx_utc, noise))
            self.counts["garbage_chunks"] += 1
        out.append((rx, rx_utc, data))
        self.counts["frames"] += 1
        return out

    def torn_tail(self, last: dict[str, float], seq: int, duration_s: float) -> bytes:
        """The first third of the record that a power cut interrupted (see the notes)."""
        fields = {k: v for k, v in last.items() if k != "t_s"}
        tail = encode_record(KIND_RAW_INPUT,
                             self._wrap(encode_air(fields, seq, self.start_utc_s + 1e3)),
                             self.start_utc_s + duration_s + 0.05, self.rx_prev + 0.05)
        return tail[: len(tail) // 3]


def encode_samples(encoder: FeedEncoder, samples: Sequence[dict[str, float]]) -> list[Chunk]:
    """Every received chunk of ``samples`` (sequence numbers 0, 1, ...)."""
    out: list[Chunk] = []
    for seq, s in enumerate(samples):
        out.extend(encoder.encode(s, seq))
    return out


def write_record(path: str | Path, chunks: Iterable[Chunk], note: str, mono_start_s: float,
                 start_utc_s: float, tail: bytes = b"") -> None:
    """Write a record file: a ``note`` event, one raw-input record per chunk, and ``tail``
    (the torn last record of a power cut) appended after the file is closed.

    The file header's creation time is set to ``start_utc_s`` (the flight's own clock,
    not the wall clock), so the same feed always gives the same bytes.
    """
    path = Path(path)
    if path.exists():
        path.unlink()
    with Recorder(path, fsync_interval_s=3600.0) as rec:
        rec.write(KIND_EVENT, encode_event("note", text=note), start_utc_s, mono_start_s)
        for rx, rx_utc, data in chunks:
            rec.write(KIND_RAW_INPUT, data, rx_utc, rx)
    stamp_header(path, start_utc_s)
    if tail:
        with open(path, "ab") as f:
            f.write(tail)


def stamp_header(path: str | Path, created_utc_s: float) -> None:
    """Set the creation time in a record file's header (and its CRC) to ``created_utc_s``
    (file layout: :mod:`advisory.io.records`)."""
    head = HEADER.pack(MAGIC, VERSION, 0, float(created_utc_s))
    with open(path, "r+b") as f:
        f.write(head + crc32c(head).to_bytes(4, "big"))
