"""``boom-advisory check``: one air-data state and a zone file in, one advisory out."""

from __future__ import annotations

import argparse
import dataclasses
import json
import math
from pathlib import Path
from typing import Any

from advisory import units
from advisory.cli.options import (
    UsageError,
    add_aircraft_option,
    add_config_option,
    add_json_option,
    add_table_option,
    add_zones_option,
)
from advisory.cli.spread_options import (
    add_spread_options,
    cutoff_sigma_direct,
    spread_fields,
    spread_lines,
    spread_model,
)
from advisory.physics.aircraft import aircraft_from_dict
from advisory.physics.spread import SpreadModel
from advisory.pipeline.advisor import Advisor
from advisory.pipeline.config import load_config
from advisory.pipeline.ground_levels import ground_level_m
from advisory.pipeline.results import Advisory
from advisory.pipeline.state import AirDataState, StateValidator
from advisory.pipeline.zones import ZoneSet
from advisory.schema import SAFETY_CAUTION
from advisory.tables.cache import default_table
from advisory.tables.table import BoomTable


class StateFileError(ValueError):
    """A state file that cannot be used; the message names the field."""


def load_state_fields(path: str | Path) -> dict[str, Any]:
    """Read a state file: one JSON object with the air-data field names.

    Raises
    ------
    StateFileError
        The file cannot be read, is not JSON, or is not one object; the message names
        the file.
    """
    try:
        obj = json.loads(Path(path).read_text(encoding="utf-8"))
    except OSError as exc:
        raise StateFileError(f"state file {path}: cannot read ({exc.strerror})") from exc
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise StateFileError(f"state file {path}: not valid JSON ({exc})") from exc
    except RecursionError:
        raise StateFileError(f"state file {path}: JSON nested too deeply") from None
    if not isinstance(obj, dict):
        raise StateFileError(f"state file {path}: expected one JSON object")
    return obj


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register ``boom-advisory check``."""
    p = sub.add_parser("check", help="advise on one air-data state against a zone file",
                       description="Advise on one air-data state against a zone file. "
                                   + SAFETY_CAUTION)
    p.add_argument("--state", required=True, metavar="FILE",
                   help="JSON object with lat_deg, lon_deg, alt_ft, mach, heading_deg, gs_kt, "
                        "bank_deg, fpa_deg (optional mach_rate_per_s, sat_c, wind_from_deg, "
                        "wind_kt, track_deg)")
    add_zones_option(p, required=True)
    add_aircraft_option(p)
    add_table_option(p)
    add_config_option(p)
    add_json_option(p)
    add_spread_options(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """``check``: exit 0 with the advisory printed."""

    fields = load_state_fields(args.state)
    validator = StateValidator()
    state = validator.validate(fields, rx_monotonic=0.0, now_monotonic=0.0)
    if not isinstance(state, AirDataState):
        raise StateFileError(f"state file {args.state}: {state.detail}")
    zones = ZoneSet.from_file(args.zones)
    config = load_config(args.config)
    if args.table:
        if args.aircraft:
            raise UsageError("--aircraft: cannot be combined with --table (the table fixes "
                             "the aircraft)")
        table = BoomTable.load(args.table)
    else:
        table = default_table(args.aircraft)
    model = spread_model(args, table.grid.ground_elevation_m)
    given: dict[str, Any] = {  # the options given override the config
        k: float(v) for k, v in (("confidence", args.confidence),
                                 ("surface_temp_sigma_c", args.surface_temp_sigma_c),
                                 ("wind_sigma_kt", args.wind_sigma_kt)) if v is not None}
    config = dataclasses.replace(config, **given)
    advisor = Advisor(table, zones, config)
    adv = advisor.step(state, now_monotonic=0.0)
    grounds = judged_grounds_ft(advisor, zones)
    extra = confidence_fields(args, model, advisor, adv)
    if args.json:
        record = adv.to_record()
        for c, rec in zip(adv.conflicts, record["conflicts"], strict=True):
            rec["ground_ft"] = grounds[c.zone_index]  # the ground it was judged on
        record.update(extra)
        print(json.dumps(record, indent=2))
    else:
        text = advisory_text(adv, state, grounds).split("\n")
        print("\n".join(text[:-1] + (spread_lines(extra) if extra else []) + text[-1:]))
    return 0


def confidence_fields(args: argparse.Namespace, model: SpreadModel, advisor: Advisor,
                      adv: Advisory) -> dict[str, Any]:
    """The intervals at the present state (:mod:`advisory.cli.spread_options`); empty
    when the advisory is unavailable or the flight subsonic."""
    now = advisor.present_condition
    if adv.status == "unavailable" or now is None or adv.cutoff_mach is None:
        return {}
    alt, mach, hdg, fpa = now
    table = advisor.table
    atm = table.atmosphere()
    ground = table.grid.ground_elevation_m
    st = table.spread
    sigma = (st.cutoff_sigma(model.covariance(alt), alt, fpa, hdg) if st is not None else
             cutoff_sigma_direct(atm, model, alt, hdg, fpa, ground))
    out = spread_fields(args, model, atm, aircraft_from_dict(table.header["aircraft"], "table"),
                        float(table.header["reflection_factor"]), alt, mach, hdg, fpa,
                        ground, adv.cutoff_mach, sigma)
    if adv.zone_id is not None and adv.boom_probability is not None:
        # the first zone in conflict: the boom of the emission touching it first
        out["boom_probability"] = round(adv.boom_probability, 4)
        out["boom_probability_of"] = f"the boom reaching zone {adv.zone_id}"
    return out


def judged_grounds_ft(advisor: Advisor, zones: ZoneSet) -> list[float]:
    """For each zone, the ground elevation (ft) its table was traced to: the zone's own
    rounded up to a ground level, or the table's (:mod:`advisory.pipeline.ground_levels`)."""
    base = advisor.table.grid.ground_elevation_m
    return [round(units.m_to_ft(ground_level_m(z.ground_elevation_m, base)), 0) for z in zones]


def advisory_text(adv: Advisory, state: AirDataState,
                  grounds_ft: list[float] | None = None) -> str:
    """Readable advisory for a person (aviation units), ending with the caution;
    ``grounds_ft``: per zone, the ground (ft) it was judged on, said when not 0."""
    lines = [adv.cue]
    lines.append(f"status: {adv.status}" + (f" ({adv.reason})" if adv.reason else ""))
    if adv.cutoff_mach is not None:
        lines.append(f"present: Mach {state.mach:.2f} at {units.m_to_ft(state.alt_m):,.0f} ft; "
                     f"cutoff Mach {adv.cutoff_mach:.3f}; boom "
                     f"{'reaches' if adv.reaches_ground else 'does not reach'} the ground")
    for c in adv.conflicts:
        ground = grounds_ft[c.zone_index] if grounds_ft else 0.0
        lines.append(f"  zone {c.zone_id} ({c.zone_name}"
                     + (f", ground {ground:,.0f} ft" if ground else "")
                     + f"): contact in {c.time_to_contact_s:.0f} s,"
                     f" {units.pa_to_psf(c.overpressure_pa):.2f} psf"
                     + (" focus boom" if c.focus else ""))
    if adv.status in ("advisory", "caution", "warning", "unavoidable"):
        lines.extend(resolution_lines(adv))
    if adv.tables_stale:
        lines.append("note: tables stale (a newer atmosphere is being processed)")
    lines.append(SAFETY_CAUTION)
    return "\n".join(lines)


def resolution_lines(adv: Advisory) -> list[str]:
    """What can still be done, for a person: the checked resolutions (each one a trial
    flight that kept every later boom off the zones), the time left to act, and the
    present cutoff Mach less the margin."""
    lines = []
    offered = (adv.resolve_mach is not None or adv.turn_left_deg is not None
               or adv.turn_right_deg is not None)
    if adv.status == "unavoidable":
        lines.append("booms already on their way reach the zone: tell the people on the "
                     "ground" + ("; the resolutions below keep later booms off" if offered
                                 else ""))
        if not offered:
            return lines
    res = []
    both = " with the turn" if adv.combined else ""
    if adv.resolve_mach is not None:
        res.append(f"slow to Mach {adv.resolve_mach:.2f}{both}")
    for side, v, hdg in (("left", adv.turn_left_deg, adv.turn_left_hdg_deg),
                         ("right", adv.turn_right_deg, adv.turn_right_hdg_deg)):
        if v is not None:
            to = f" to heading {hdg:03.0f}" if hdg is not None else ""
            res.append(f"turn {side} {v:.0f} deg{to}" + (" with the slowing"
                                                          if adv.combined else ""))
        else:
            res.append(f"no {side} turn up to the search limit clears")
    if adv.resolve_mach is None and not adv.combined:
        res.append("no Mach alone clears")
    lines.append("checked resolutions: " + "; ".join(res))
    if adv.act_by_s is not None:
        # cut down to whole seconds, as the crew's line says it (pipeline/cues.py)
        lines.append(f"act within {math.floor(adv.act_by_s)} s (the latest start of the "
                     "first resolution that still clears)")
    elif adv.conflicts and adv.status != "unavoidable":
        lines.append("nothing found that clears: act now, and tell the people on the ground")
    if adv.max_mach_off_ground is not None:
        lines.append(f"Mach {adv.max_mach_off_ground:.2f} or less keeps the boom off the "
                     "ground here")
    return lines

