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
WIRE_FORMAT_VERSION = 1  #: the only wire format version this code reads and writes
FRAME_TYPES = ("air", "adv", "status")
HEADER_KEYS = ("v", "type", "seq", "utc_s")

#: Air-data fields every ``air`` frame carries, in canonical order after the header.
AIR_REQUIRED = (
    "lat_deg", "lon_deg", "alt_ft", "mach", "heading_deg", "gs_kt", "bank_deg", "fpa_deg",
)
#: Air-data fields a frame may carry (nil or absent when the source does not have them).
AIR_OPTIONAL = ("track_deg", "mach_rate_per_s", "sat_c", "wind_from_deg", "wind_kt")
AIR_FIELDS = AIR_REQUIRED + AIR_OPTIONAL  #: canonical order after the header

# ----------------------------------------------------------------------------- advisories
#: Advisory statuses, from "nothing to say" to the highest crew-alerting level, and the
#: status published when no advice can be given.
ADV_STATUSES = ("no_boom", "clear", "advisory", "caution", "warning", "unavailable")
#: The statuses that name a zone in conflict (the three crew-alerting levels).
CONFLICT_STATUSES = ("advisory", "caution", "warning")
#: Alert rank of each status that is not ``unavailable`` (higher is more urgent).
STATUS_RANK = {"no_boom": 0, "clear": 0, "advisory": 1, "caution": 2, "warning": 3}
ADV_FIELDS = (
    "status", "zone_id", "time_to_contact_s", "overpressure_psf", "focus",
    "max_mach_off_ground", "turn_left_deg", "turn_right_deg", "tables_stale", "cue",
)
ADV_NULLABLE_FLOATS = (
    "time_to_contact_s", "overpressure_psf", "max_mach_off_ground", "turn_left_deg",
    "turn_right_deg",
)

# ----------------------------------------------------------------------------- status frames
STATUS_STATES = ("ok", "degraded", "unavailable")
STATUS_FIELDS = ("state", "reason", "counters")
#: Identity of what the service runs with: software version and the first 16 hex digits of
#: the SHA-256 of the table, zones and config files. Today in the record's ``start`` event
#: and the start log line; proposed as optional status-frame keys (ICD section 7 allows
#: new optional fields) once the encoder and the C binding carry them.
STATUS_IDENTITY_FIELDS = ("sw", "table_sha", "zones_sha", "config_sha")

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
    "profile_rejected": ("reason",),        # --profile file refused or rebuild failed
}
EVENT_CODES = tuple(EVENT_FIELDS)

# ----------------------------------------------------------------------------- counters
#: Counters the ``run`` driver keeps and hands to the loop before every poll (they appear
#: in its status frames); a replay restores them from the record. A replay initialises
#: only those the recorded status frames carry, so records written before a counter was
#: added still replay byte for byte.
SERVICE_COUNTERS = ("input_lost", "input_reopened", "output_dropped", "output_errors",
                    "log_dropped", "profile_rejected")
