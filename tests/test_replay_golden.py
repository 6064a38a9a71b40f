"""Replays stay byte-identical across refactors (a golden-master check, issue 11).

``tests/data/records_v1/digests.json`` holds, for every bundled demo flight and for
four service records made by this suite's end-to-end tests, the SHA-256 of every
output frame a replay produces (its monotonic time and its payload). The digests were
taken once from the code as it stood before the package was reshaped (commit 4709280),
so they are an outside check on the move: the reshaped code must reproduce them bit
for bit. The service records are record format 1 (events written as text lines), so
the same test shows old records still replay after the record format changed.

When a later change alters the advice on purpose (new physics, new levels) or a demo
flight itself, the digests are regenerated with ``python tests/test_replay_golden.py
--write`` and the commit says why; a refactor must never need that. Retaken so far:
``demo/coastal_approach`` once, when its scenario changed (the crew now slows after the
advisory, because the truth harness showed that slowing after the caution still puts
booms on the town; issue 12, item 9). All nine once more for issue 15's heartbeat:
status frames are now due 0.1 s before the heartbeat on the step schedule, so a replay
carries about one status frame more every ten seconds; every advisory frame stayed the
same (checked by comparing the decoded advisory frames of all nine replays before and
after, field for field). Then all of them for issue 13, in one retake after merging its
parts: the crew line (at most 40 characters; the advisory frame is format version 2 with
five new optional keys), act-by levels and checked resolutions (levels on the time left
to act, the Mach resolution trial-flown, turns with roll-in after the reaction time, the
``unavoidable`` status) and the flown history (the booms already in the air placed from
the states actually flown, over the longest travel time instead of a 150 s cap).
``demo/turn_onto_park`` once more when the conflict search began reading the overpressure
across each carpet strip instead of at its two end nodes (``advisory/pipeline/conflicts.py``):
8 of its 1,002 frames name a larger overpressure during the roll-in (up to 3.469 psf
where 2.681 psf was named, a focus warning); every status, zone, time to contact and
crew line stayed the same (decoded advisory frames of all nine replays compared field by
field before and after; the other eight identical). ``demo/crosswind_day`` once more when
wind tables took headings every 15 deg with six-point interpolation (issue 14, item 3):
of its 1,000 advisory frames 111 differ, every status and crew line the same: the time
to contact 0.1 s later in 25 frames, an act-by time 7.4 s for 7.8 s in one, a right turn
to 030 offered besides the Mach in 75 frames of the advisory level and a left turn to 350
in 10 fewer near the end (decoded advisory frames compared field by field before and
after). All five demo flights once more for issue 16: the advisor reads the cutoff Mach
at its 95 % confidence (a boom below the cutoff by less than 1.645 sigma of the air below
counts, and the Mach kept off the ground is the cutoff less 1.645 sigma, in place of a
fixed 0.02), and the advisory frame carries key 17, ``boom_probability`` (their tables
have sensitivity columns; the service records' tables have none and keep the fixed
margin, unchanged). Decoded advisory frames compared field by field before and after:
``demo/coastal_approach`` offers M1.13 for M1.14 in its 301 frames with a Mach (110 act-by
times differ with it) and, slowed below the cutoff within the band, says "NEAR CUTOFF, BOOM
MAY REACH" for "BOOM ON GROUND" in 9 frames (``near_cutoff`` now spans the band below the
cutoff); every other field of every frame of the five flights the same.
``demo/crosswind_day`` and ``demo/turn_onto_park`` once more for issue 16's edge ratio:
key 17 is now the probability that the boom reaches the zone named, not only the ground
(``advisory/pipeline/edge_spread.py``). Decoded advisory frames compared field by field
before and after: only ``boom_probability`` differs, 1.0 -> 0.66-0.70 in 1,000 frames of
the crosswind flight (Orrinford lies near the windy carpet's edge) and 1.0 -> 0.56 in 80
frames of the turn (the park near the turning carpet's edge); the other three flights and
the service records identical.
All of them once more for issue 13's strips: the carpet is searched in 10 strips across
its width instead of 6 (``strips`` in ``advisory/pipeline/config.py``), so a zone touched
near the carpet's edge is read at the overpressure of the narrower strip it touches.
Decoded advisory frames compared field by field before and after: ``demo/below_cutoff``
and ``demo/dropouts_and_garbage`` identical; ``demo/crosswind_day`` names 0.584 psf at
Orrinford for 0.674 (the truth, ``replay --truth``: 0.417 psf) and a contact 25 s later,
offers no right turn to 030 in 75 frames (the M1.20 stays), says caution for advisory in
3 frames and for warning in one, and warning for unavoidable in 9 (the truth's booms into
the zone are unavoidable from 90.5 s; the advisor now says so from 84.4 s, before from
83.5 s); ``demo/coastal_approach`` one frame of caution for warning, act-by times 0.1 s
later, contact 0.4 s later and 0.873 for 0.877 psf; ``demo/turn_onto_park`` act-by 0.1 s
later and contact 15 s later in 80 frames; the service records 0.917 psf for 0.929 (0.873
for 0.877), act-by 0.1 s earlier and contact 0.5-3 s later, every status the same.
``demo/crosswind_day`` and three service records once more for issue 13's Mach hold
margin: below a target that failed, the Mach offered is the largest that clears less
0.01 (``mach_hold_margin``, ``advisory/pipeline/resolutions.py``). Decoded advisory frames
compared field by field before and after: the crosswind flight offers M1.19 for M1.20 in
637 of its 1,000 frames (act-by times 0.2-0.4 s apart in 51, a left turn to 350 offered
besides in one), ``full_output``, ``serial_unplugged`` and ``udp_sigterm`` M1.13 for M1.14
(act-by 0.1-0.7 s apart in 5 frames); every status the same; the other flights and
``live`` identical (``demo/coastal_approach``'s M1.13 is its lowest candidate, which
keeps no margin; ``demo/turn_onto_park``'s roll-out is a target at the present Mach).
``demo/turn_onto_park`` once more for the trials' roll emissions (every 1 s while a trial
rolls, ``advisory/pipeline/trial_base.py``) and the search at the limit itself (key 18,
``at_limit``, sent only when true: no frame of these flights carries it). Decoded advisory
frames compared field by field before and after: the right turn's act-by 0.6 s sooner in
16 frames (41.2 -> 40.6 s at 32.3 s; the cue's "ACT 41S" -> "ACT 40S" in 7 of them);
every other field of every frame of every flight and service record the same.
All but three once more for the reuse of the last prediction (a step reuses it, its times
counted down, for up to 1 s while the flight goes as predicted: ``predict_every_s``,
``advisory/pipeline/reuse.py``; the resolutions renewed by flying the actions on offer
again while it does: ``advisory/pipeline/renewal.py``). Decoded advisory frames compared
field by field before (527772f) and after: ``demo/below_cutoff``,
``demo/dropouts_and_garbage`` and ``live`` identical; ``demo/coastal_approach`` 253 of its
1,334 advisory frames differ, every status the same: act-by times up to 1.1 s apart in 242
(the cue's seconds in 130), the probability up to 0.06 apart in 10, 0.873 for 0.877 psf in
6, a right turn to 125 offered 0.5 s longer (5 frames); ``demo/crosswind_day`` 607 of 888:
the probability 0.69 for 0.70 and back in 298, act-by times up to 0.6 s apart in 477 (the
cue's seconds in 127), contact times up to 2.5 s apart in 26 (the emissions are 3 s
apart; a reused contact time counts down smoothly), a left turn to 350 offered in 11 more
frames, the combination (M1.13 with a turn) 0.6 s sooner in 6 frames, caution named 0.1 s
later (one frame) and the booms on their way named 0.1 s later (one frame);
``demo/turn_onto_park`` 2 of 800 (contact 0.3 s, act-by 0.1 s, 1.127 for 1.114 psf); the
service records ``full_output``, ``serial_unplugged`` and ``udp_sigterm`` contact times up
to 1.2 s and act-by times up to 0.8 s apart, 0.929 for 0.917 psf and back, every status
the same.
"""

from __future__ import annotations

import hashlib
import json
import struct
import sys
from pathlib import Path

import pytest

from advisory.bench.demo import demo_flights_dir
from advisory.bench.replay import replay_log
from advisory.bench.scenario import prepare

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT / "tests" / "data" / "records_v1"
DIGESTS = DATA / "digests.json"

#: Service records made by the end-to-end tests (UDP run stopped by SIGTERM, a serial run
#: whose pty vanished and came back, a stuck serial output, a live run replayed), with
#: the zone file and table each was recorded with.
SERVICE_RECORDS = {
    "udp_sigterm": "small.boomtable",
    "serial_unplugged": "small.boomtable",
    "full_output": "small.boomtable",
    "live": "live.boomtable",
}


def _digest(res) -> dict:
    h = hashlib.sha256()
    for mono, _utc, payload in res.outputs:
        h.update(struct.pack(">dI", mono, len(payload)))
        h.update(payload)
    return {"outputs": len(res.outputs), "sha256": h.hexdigest(),
            "recorded_match": res.recorded_match}


def replay_digest(name: str) -> dict:
    """Replay one bundled flight (``demo/<flight>``) or service record and digest it."""
    if name.startswith("demo/"):
        setup = prepare(str(demo_flights_dir() / name.split("/", 1)[1]), quiet=True)
    else:
        setup = prepare(str(DATA / f"{name}.boomrec"), zones=str(DATA / f"{name}.zones.geojson"),
                        table=str(DATA / SERVICE_RECORDS[name]), quiet=True)
    return _digest(replay_log(setup))


def _names() -> list[str]:
    flights = sorted(p.parent.name for p in (ROOT / "replay_logs").glob("*/flight.rec"))
    return [f"demo/{f}" for f in flights] + sorted(SERVICE_RECORDS)


@pytest.mark.parametrize("name", _names())
def test_replay_is_byte_identical_to_before_the_reshaping(name):
    # Source: digests taken from the pre-reshaping code (commit 4709280), see module notes.
    expected = json.loads(DIGESTS.read_text())[name]
    assert replay_digest(name) == expected


if __name__ == "__main__":
    if sys.argv[1:] != ["--write"]:
        sys.exit("usage: python tests/test_replay_golden.py --write")
    DIGESTS.write_text(json.dumps({n: replay_digest(n) for n in _names()}, indent=2,
                                  sort_keys=True) + "\n")
    print(f"wrote {DIGESTS}")
