"""Events of version-1 record files (read only): text lines mapped to typed events.

Version-1 records held events as UTF-8 text lines; version 2 (:mod:`advisory.io.records`)
writes typed MessagePack events. Only old records are parsed this way.
"""

from __future__ import annotations

import json
from typing import Any

#: Version-1 records held events as text lines; the prefixes that the service wrote,
#: each mapped to its typed code and the field its remainder fills. Read-only: only
#: old records are parsed this way.
_V1_PREFIXES = (
    ("input open failed: ", "input_open_failed", "reason"),
    ("input open: ", "input_open", "url"),
    ("input lost: ", "input_lost", "reason"),
    ("output open failed: ", "output_open_failed", "reason"),
    ("output open: ", "output_open", "url"),
    ("output lost: ", "output_lost", "reason"),
    ("output error: ", "output_error", "reason"),
    ("internal error (going on): ", "internal_error", "reason"),
    ("start failed: ", "start_failed", "reason"),
    ("stopping: ", "stopping", "reason"),
)


def decode_v1_event(text: str) -> tuple[str, dict[str, Any]]:
    """(code, fields) of one version-1 event text line (never raises; ``note`` when
    the line is none of the known ones)."""
    if text.startswith("start {") or text.startswith("stats {"):
        try:
            doc = json.loads(text[6:])
        except ValueError:
            return ("note", {"text": text})
        if text.startswith("start"):
            return ("start", {"settings": doc})
        return ("stats", {"kind": doc.get("event", "stats"), "stats": doc})
    if text == "shutdown":
        return ("shutdown", {})
    if text == "output writer still blocked at shutdown":
        return ("output_blocked", {})
    if text.startswith("first advisory out ") and text.endswith(" s after start"):
        try:
            return ("first_advisory", {"after_s": float(text.split()[3])})
        except (ValueError, IndexError):
            return ("note", {"text": text})
    for prefix, code, field_name in _V1_PREFIXES:
        if text.startswith(prefix):
            rest = text[len(prefix):]
            if code == "input_open_failed":
                rest = rest.removesuffix("; retrying with backoff")
            return (code, {field_name: rest})
    return ("note", {"text": text})
