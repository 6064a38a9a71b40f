"""Fuzz the whole input path: generated and mutated frames through the real loop.

Issue 8: at least 100,000 generated and mutated frames (hypothesis); the decoders and the
validator never raise, every rejected frame is counted with its reason, and no bad frame
ever reaches the advisor. The advisor is the real one, wrapped by an oracle that checks
every state handed to it against the interface ranges (docs/interface.md section 4).
"""

from __future__ import annotations

import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from advisory.io.framing import frame_stream
from advisory.io.messages import encode_air
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.state import ValidatorLimits
from advisory.pipeline.zones import ZoneSet
from advisory.schema import AIR_REQUIRED as REQUIRED_FIELDS
from advisory.schema import FRESHNESS_REASONS
from advisory.service.loop import AdvisoryLoop

LIMITS = ValidatorLimits().ranges
FRAMES_PER_EXAMPLE = 200
EXAMPLES = 520  # 520 x 200 = 104,000 frames


class CheckingAdvisor:
    """The real advisor behind an oracle: no invalid state may reach it."""

    def __init__(self, inner: Advisor) -> None:
        self.inner = inner
        self.states = 0

    def __getattr__(self, name):
        return getattr(self.inner, name)

    def step(self, state, now_monotonic=None):
        if state is not None:
            self.states += 1
            fields = state.to_fields()
            for name in REQUIRED_FIELDS:
                v = fields[name]
                lo, hi = LIMITS[name]
                assert v is not None and math.isfinite(v), (name, v)
                # heading is normalised to [0, 360); the others keep their value
                assert lo - 1e-6 <= v <= hi + 1e-6, (name, v)
        return self.inner.step(state, now_monotonic)


plausible = {
    "lat_deg": (29.0, 31.0), "lon_deg": (-141.0, -139.0), "alt_ft": (40000.0, 50000.0),
    "mach": (0.8, 2.5), "heading_deg": (0.0, 359.9), "gs_kt": (400.0, 1400.0),
    "bank_deg": (-30.0, 30.0), "fpa_deg": (-3.0, 3.0),
}
WILD = (math.nan, math.inf, -math.inf, -1e300, 1e300, -1.0, 1e6, -1e6, 0.0, 5e4)


@st.composite
def frame_batches(draw):
    """A batch of frames from a hypothesis-drawn seed and base state: mostly plausible,
    some with wild values, some with flipped bytes, torn, or garbage."""
    import random

    rng = random.Random(draw(st.integers(0, 2**32 - 1)))
    base = {k: draw(st.floats(lo, hi)) for k, (lo, hi) in plausible.items()}
    wild_rate = draw(st.floats(0.0, 0.5))
    out = []
    for i in range(FRAMES_PER_EXAMPLE):
        fields = dict(base)
        if rng.random() < wild_rate:
            fields[rng.choice(sorted(plausible))] = rng.choice(WILD) * rng.choice((1, 1, 3.7))
        payload = encode_air(fields, i, 1.9e9 + 0.05 * i)
        data = bytearray(frame_stream(payload))
        r = rng.random()
        if r < 0.1:  # flip bytes
            for _ in range(rng.randint(1, 3)):
                data[rng.randrange(len(data))] = rng.randrange(256)
        elif r < 0.15:  # torn
            data = data[: rng.randint(1, len(data))]
        elif r < 0.2:  # garbage
            data = bytearray(rng.randbytes(rng.randint(1, 80)))
        out.append(bytes(data))
    return out


@pytest.mark.slow
def test_fuzz_frames_through_the_loop(small_table) -> None:
    empty = ZoneSet.from_geojson({"type": "FeatureCollection", "features": []})
    total = {"frames": 0}

    @settings(max_examples=EXAMPLES, deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                     HealthCheck.function_scoped_fixture])
    @given(frame_batches())
    def run(batch) -> None:
        oracle = CheckingAdvisor(Advisor(small_table, empty))
        loop = AdvisoryLoop(oracle, rate_hz=2.0)  # fewer steps: the input path is the subject
        t = 100.0
        for data in batch:
            loop.feed(data, t, 1.9e9 + t)
            loop.poll(t, 1.9e9 + t)
            t += 0.05
        c = loop.counters
        total["frames"] += len(batch)
        # every decoded frame (all are air-data frames here) is accepted or rejected, and
        # every rejection is counted under its reason code
        assert c["valid"] + c["rejected"] == c["decoded"]
        reasons = sum(v for k, v in c.items() if ":" in k or k in (
            "stale", "clock_step", "utc_backwards", "rx_backwards", "wind_incomplete",
            *FRESHNESS_REASONS))
        assert reasons == c["rejected"]

    run()
    assert total["frames"] >= 100_000
