"""One home for each fact shared across the package: field names, statuses, reason
codes, limits, and the record-event codes.

Every other module imports these names from here; the interface control document
(``docs/interface.md``) states the same values for the avionics side, and the C binding
(``bindings/c/boom_wire.h``) repeats the wire-level ones (a test cross-checks them).
Nothing here imports anything else from the package.
"""

from __future__ import annotations

# ----------------------------------------------------------------------------- identity
#: The package version (pyproject.toml reads it from here: one home).
VERSION = "0.1.0"
#: The caution every human-facing output carries.
SAFETY_CAUTION = (
    "CAUTION: boom-advisory is an advisory aid, not certified flight software. "
    "Local regulations and licensed practice govern supersonic flight."
)

# ----------------------------------------------------------------------------- wire
#: Format version of air-data and status frames (ICD section 7).
WIRE_FORMAT_VERSION = 1
#: Format version of advisory frames: 2 since the status ``unavoidable`` (issue 13), an
#: incompatible change under the ICD's version rule (section 7). Version 1 advisory
#: frames are still read, and written on request for older receivers.
ADV_FORMAT_VERSION = 2
#: Format versions this code reads, by frame type (ICD section 7).
READ_VERSIONS = {"air": (1,), "adv": (1, 2), "status": (1,)}
FRAME_TYPES = ("air", "adv", "status")
HEADER_KEYS = ("v", "type", "seq", "utc_s")

#: Air-data fields every ``air`` frame carries, in canonical order after the header.
AIR_REQUIRED = (
    "lat_deg", "lon_deg", "alt_ft", "mach", "heading_deg", "gs_kt", "bank_deg", "fpa_deg",
)
#: Air-data fields a frame may carry (nil or absent when the source does not have them).
#: ``pitch_rate_dps`` (body pitch rate, deg/s, nose up positive) and ``load_factor``
#: (normal load factor, g) were appended later under the ICD's version rule (section 7),
#: then the flight-guidance targets the crew has selected: ``selected_alt_ft`` (pressure
#: altitude the climb or descent levels off at, ft), ``selected_heading_deg`` (true
#: heading the turn rolls out on, deg) and ``selected_mach`` (Mach the acceleration or
#: deceleration ends at).
AIR_OPTIONAL = ("track_deg", "mach_rate_per_s", "sat_c", "wind_from_deg", "wind_kt",
                "pitch_rate_dps", "load_factor",
                "selected_alt_ft", "selected_heading_deg", "selected_mach")
#: The groups of optional fields appended after the first release, in the order they
#: came, last in AIR_OPTIONAL. Encoders write every group up to the last one the sender
#: has a value of (nil for a key of those groups not sent) and no group after it, so a
#: frame without later fields is the first release's 13-field frame byte for byte, and a
#: frame with only the pitch and load pair is the 15-field frame of that release.
AIR_LATER_GROUPS = (("pitch_rate_dps", "load_factor"),
                    ("selected_alt_ft", "selected_heading_deg", "selected_mach"))
#: Every later optional field (the groups of AIR_LATER_GROUPS, in order).
AIR_LATER_OPTIONAL = tuple(name for group in AIR_LATER_GROUPS for name in group)
#: The flight-guidance targets (the second later group): where the present manoeuvre ends.
AIR_TARGETS = AIR_LATER_GROUPS[1]
AIR_FIELDS = AIR_REQUIRED + AIR_OPTIONAL  #: canonical order after the header

# ----------------------------------------------------------------------------- advisories
#: Advisory statuses, from "nothing to say" to the highest crew-alerting level, and the
#: status published when no advice can be given.
ADV_STATUSES = ("no_boom", "clear", "advisory", "caution", "warning", "unavoidable",
                "unavailable")
#: The statuses that name a zone in conflict (the three crew-alerting levels).
CONFLICT_STATUSES = ("advisory", "caution", "warning", "unavoidable")
#: Alert rank of each status that is not ``unavailable`` (higher is more urgent).
STATUS_RANK = {"no_boom": 0, "clear": 0, "advisory": 1, "caution": 2, "warning": 3,
               "unavoidable": 4}
#: The statuses of advisory frame version 1 (``unavoidable`` came with version 2).
ADV_STATUSES_V1 = ("no_boom", "clear", "advisory", "caution", "warning", "unavailable")
#: Advisory fields of format version 1, in canonical order after the header.
ADV_FIELDS_V1 = (
    "status", "zone_id", "time_to_contact_s", "overpressure_psf", "focus",
    "max_mach_off_ground", "turn_left_deg", "turn_right_deg", "tables_stale", "cue",
)
#: Optional advisory fields added by issue 13 (after the version-1 ones; nil / false
#: when absent): act-by time, resolution Mach, target headings of the turns, combined;
#: by issue 14 ``near_cutoff`` (sent only when true); by issue 16 ``boom_probability``
#: (sent only when known); by issue 13 again ``at_limit`` and ``level_off`` (each sent
#: only when true).
ADV_OPTIONAL = ("act_by_s", "resolve_mach", "turn_left_hdg", "turn_right_hdg", "combined",
                "near_cutoff", "boom_probability", "at_limit", "level_off")
#: Optional flags sent only when true (absent: false), so other frames stay as they were.
ADV_SENT_WHEN_TRUE = ("near_cutoff", "at_limit", "level_off")
#: Optional numbers sent only when known (absent: nil), for the same reason.
ADV_SENT_WHEN_KNOWN = ("boom_probability",)
#: The advisory fields that are true / false (the others are numbers, text or nil).
ADV_FLAGS = ("focus", "tables_stale", "combined", "near_cutoff", "at_limit", "level_off")
ADV_FIELDS = ADV_FIELDS_V1 + ADV_OPTIONAL  #: canonical order after the header
ADV_NULLABLE_FLOATS = (
    "time_to_contact_s", "overpressure_psf", "max_mach_off_ground", "turn_left_deg",
    "turn_right_deg", "act_by_s", "resolve_mach", "turn_left_hdg", "turn_right_hdg",
    "boom_probability",
)

# ----------------------------------------------------------------------------- status frames
STATUS_STATES = ("ok", "degraded", "unavailable")
STATUS_FIELDS = ("state", "reason", "counters")
#: Optional identity keys a status frame may carry after ``counters`` (ICD section 6):
#: the software version and 16-hex-digit digests of the table, zone and config files.
STATUS_IDENTITY_FIELDS = ("sw", "table_sha", "zones_sha", "config_sha", "table_range")

# ----------------------------------------------------------------------------- trust
#: Key of the authentication entry, the last of a signed frame's map (ICD section 7.1).
AUTH_KEY = "auth"
AUTH_TAG_LEN = 32  #: HMAC-SHA256 tag, bytes (RFC 2104, FIPS 180-4)
AUTH_KEY_MIN_BYTES = 32  #: shortest shared key (RFC 2104 section 3: not less than L = 32)
#: With no authenticated frame of a type accepted for this long, the next one re-anchors
#: the sequence check (a restarted sender starts its ``seq`` again). Engineering choice,
#: no source: four times the staleness limit, so a replayed capture can get in only after
#: the real sender has been silent (and the advisory unavailable) for 2 s.
AUTH_RESYNC_S = 2.0
#: Distinct refused UDP sources logged (one line each) before further ones are only
#: counted: a flood from random source ports must not flood the log.
MAX_LOGGED_SOURCES = 32

# ----------------------------------------------------------------------------- sizes
MAX_PAYLOAD = 4096  #: largest MessagePack payload, bytes
CRC_LEN = 4  #: CRC-32C trailer, bytes, big-endian
MAX_DEPTH = 16  #: deepest container nesting, counting the top-level map as 1
SEQ_MAX = 0xFFFFFFFF
ZONE_ID_MAX_BYTES = 63
CUE_MAX_BYTES = 127
REASON_MAX_BYTES = 127
COUNTER_NAME_MAX_BYTES = 47
MAX_COUNTERS = 48
COUNTER_MAX = 2**64 - 1

# ----------------------------------------------------------------------------- reason codes
#: Every reason code the frame decoder can give (the C binding uses the same names).
DECODE_REASONS = (
    "oversize", "malformed", "not_a_map", "missing_field", "bad_type", "bad_value",
    "unsupported_version", "unknown_type",
)
#: Every counter of the stream deframer / datagram reader.
LINK_COUNTERS = ("frames_ok", "bad_crc", "cobs_error", "too_short", "oversize")

# ----------------------------------------------------------------------------- freshness
#: Air data older than this (monotonic receive time) is stale: the validator drops it and
#: the advisor says ``unavailable`` (ICD section "Freshness"). The one staleness limit.
STALE_AFTER_S = 0.5

# ----------------------------------------------------------------------------- the Earth
#: Mean Earth radius R1 of WGS 84, m (NIMA TR8350.2, section 3.5): for the quick
#: great-circle distances of plausibility and re-projection tests, never for geodesy.
EARTH_MEAN_RADIUS_M = 6371008.8

# ----------------------------------------------------------------------------- records
#: Record-file event codes (record format 2: each event is a MessagePack map with
#: ``code`` and the fields listed here). ``replay`` acts on codes, never on wording.
EVENT_FIELDS: dict[str, tuple[str, ...]] = {
    "start": ("settings",),                 # the service's settings (a map)
    "start_failed": ("reason",),
    "first_advisory": ("after_s",),         # first advisory frame out, s after start
    "input_open": ("url",),
    "input_open_failed": ("reason",),       # the service retries with backoff
    "input_lost": ("reason",),
    "output_open": ("url",),
    "output_open_failed": ("reason",),
    "output_lost": ("reason",),
    "output_error": ("reason",),
    "output_blocked": (),                   # the writer was still blocked at shutdown
    "internal_error": ("reason",),          # caught, counted; the loop goes on
    "stopping": ("reason",),                # signal name or "stop requested"
    "stats": ("kind", "stats"),             # kind "stats" (periodic) or "final"
    "shutdown": (),
    "note": ("text",),                      # free text for people; never acted upon
    "source_refused": ("source", "allowed"),  # a new UDP source refused (first datagram)
    "profile_rejected": ("reason",),        # --profile file refused or rebuild failed
}
EVENT_CODES = tuple(EVENT_FIELDS)

# ----------------------------------------------------------------------------- counters
#: Counters the ``run`` driver keeps and hands to the loop before every poll (they appear
#: in its status frames); a replay restores them from the record. A replay initialises
#: only those the recorded status frames carry, so records written before a counter was
#: added still replay byte for byte.
SERVICE_COUNTERS = ("input_lost", "input_reopened", "output_dropped", "output_errors",
                    "log_dropped", "record_dropped", "source_refused", "auth_missing",
                    "auth_bad", "auth_replay", "profile_rejected")

# ----------------------------------------------------------------------------- record size
#: ``run --record``: size cap of one record file, MB (10^6 bytes), and rotated files kept
#: beside it; the record takes at most cap x (keep + 1) on disk. Under normal input a
#: file lasts about two hours (41-55 MB an hour measured at 20 Hz, issue 15).
RECORD_MAX_MB_DEFAULT = 100.0
RECORD_KEEP_DEFAULT = 9
RECORD_MAX_MB_MIN = 0.1  #: smallest cap accepted, MB

# ----------------------------------------------------------------------------- zone files
#: A zone ``limit_psf`` above this is implausible and warned about once per file (not
#: refused): ground booms of supersonic aircraft in level flight are typically about
#: 0.5-3 psf (value from memory), so a larger limit almost certainly means pascals typed
#: as psf (48 Pa is 1 psf) and would silently disable the zone. Common practice, no source.
ZONE_LIMIT_PSF_PLAUSIBLE_MAX = 10.0

# ----------------------------------------------------------------------------- freshness
#: Validator reason codes for frames that carry no new data (ICD section 4, "Freshness
#: and plausibility"): a repeated ``seq``, a ``seq`` behind the last accepted one, a
#: sender clock that does not advance, a position that does not move with the ground
#: speed. Each is a counter of its own in the status frames; while the latest rejection
#: is one of these, the "stale" reason names it.
FRESHNESS_REASONS = ("seq_repeat", "seq_back", "utc_frozen", "position_frozen")
