"""What ``boom-advisory run`` is told: its settings, their checks, its exit codes.

Light on purpose (standard library only), so the command line can describe the ``run``
options without loading numpy, numba or the pipeline.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from advisory.schema import (
    ADV_FORMAT_VERSION,
    RECORD_KEEP_DEFAULT,
    RECORD_MAX_MB_DEFAULT,
    RECORD_MAX_MB_MIN,
)
from advisory.tomlfile import read_toml

#: Input formats the loop reads (``docs/interface.md`` sections 9-11).
INPUT_FORMATS = ("stream", "datagram", "arinc429")
#: How the input's bytes are split into frames.
FRAMINGS = ("stream", "datagram")
#: Log levels ``run`` accepts (``debug`` adds one line per refused or rejected input).
LOG_LEVELS = ("debug", "info", "warning", "error")

EXIT_OK = 0
EXIT_RUNTIME = 1
EXIT_USAGE = 2


class RunError(ValueError):
    """A bad ``run`` setting or file; the message names the option and the value."""


@dataclass(frozen=True)
class RunSettings:
    """Everything ``boom-advisory run`` is told (see ``advisory/cli/run.py`` for the
    meaning of each option)."""

    input_url: str
    output_url: str
    zones: str
    aircraft: str | None = None
    table: str | None = None
    record: str | None = None
    config: str | None = None
    rate_hz: float = 10.0
    input_format: str | None = None
    profile: str | None = None
    duration_s: float | None = None
    label_map: str | None = None
    heartbeat_s: float = 1.0
    log_level: str = "info"
    record_max_mb: float = RECORD_MAX_MB_DEFAULT
    record_keep: int = RECORD_KEEP_DEFAULT
    allow_from: str | None = None
    auth_key: str | None = None
    learn_atmosphere: bool = False
    advisory_version: int = ADV_FORMAT_VERSION
    service_config: str | None = None


#: What a service config file (``run --service-config FILE``, TOML) may set: each key is
#: a ``run`` option spelled as on the command line without its leading dashes, mapped
#: to its :class:`RunSettings` field and kind (``str`` or ``float``).
CONFIG_KEYS: dict[str, tuple[str, type]] = {
    "input": ("input_url", str), "output": ("output_url", str), "zones": ("zones", str),
    "aircraft": ("aircraft", str), "table": ("table", str), "record": ("record", str),
    "config": ("config", str), "rate-hz": ("rate_hz", float),
    "input-format": ("input_format", str), "label-map": ("label_map", str),
    "profile": ("profile", str), "duration-s": ("duration_s", float),
    "log-level": ("log_level", str), "record-max-mb": ("record_max_mb", float),
    "record-keep": ("record_keep", int), "allow-from": ("allow_from", str),
    "auth-key": ("auth_key", str), "learn-atmosphere": ("learn_atmosphere", bool),
    "advisory-version": ("advisory_version", int),
}
#: Keys naming files: a relative path is taken from the config file's folder.
CONFIG_PATH_KEYS = ("zones", "aircraft", "table", "record", "config", "label-map", "profile",
                    "auth-key")


def read_service_config(path: str) -> dict[str, Any]:
    """The :class:`RunSettings` fields a service config file sets.

    Raises
    ------
    RunError
        The file cannot be read, is not TOML, has an unknown key or a value of the wrong
        kind (one line naming the file, the key and the value).
    """
    what = f"--service-config {path}"
    doc = read_toml(path, what, RunError)
    base = Path(path).resolve().parent
    out: dict[str, Any] = {}
    for key, value in doc.items():
        if key not in CONFIG_KEYS:
            raise RunError(f"{what}: unknown key {key!r} (known: {', '.join(CONFIG_KEYS)})")
        field, kind = CONFIG_KEYS[key]
        if kind is float:
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise RunError(f"{what}: {key} = {value!r} must be a number")
            out[field] = float(value)
        elif kind is int:
            if isinstance(value, bool) or not isinstance(value, int):
                raise RunError(f"{what}: {key} = {value!r} must be a whole number")
            out[field] = value
        elif kind is bool:
            if not isinstance(value, bool):
                raise RunError(f"{what}: {key} = {value!r} must be true or false")
            out[field] = value
        else:
            if not isinstance(value, str):
                raise RunError(f"{what}: {key} = {value!r} must be a string")
            out[field] = str(base / value) if key in CONFIG_PATH_KEYS else value
    return out


def check_settings(s: RunSettings) -> None:
    """Raise :class:`RunError` naming the first bad option and its value."""
    if not (isinstance(s.rate_hz, (int, float)) and math.isfinite(s.rate_hz)
            and 0.1 <= s.rate_hz <= 100.0):
        raise RunError(f"--rate-hz: {s.rate_hz} must be in [0.1, 100]")
    if s.advisory_version not in (1, ADV_FORMAT_VERSION):
        raise RunError(f"--advisory-version: {s.advisory_version} must be 1 or "
                       f"{ADV_FORMAT_VERSION}")
    if s.duration_s is not None and not (math.isfinite(s.duration_s) and s.duration_s > 0):
        raise RunError(f"--duration-s: {s.duration_s} must be a positive number of seconds")
    if s.input_format is not None and s.input_format not in INPUT_FORMATS:
        raise RunError(f"--input-format: {s.input_format!r} must be one of "
                       f"{', '.join(INPUT_FORMATS)}")
    if s.table and s.aircraft:
        raise RunError("--aircraft: cannot be combined with --table (the table fixes the "
                       "aircraft)")
    if s.label_map and s.input_format != "arinc429":
        raise RunError("--label-map: only with --input-format arinc429")
    if not (isinstance(s.record_max_mb, (int, float)) and math.isfinite(s.record_max_mb)
            and s.record_max_mb >= RECORD_MAX_MB_MIN):
        raise RunError(f"--record-max-mb: {s.record_max_mb} must be a number of MB >= "
                       f"{RECORD_MAX_MB_MIN}")
    if not (isinstance(s.record_keep, int) and 0 <= s.record_keep <= 1000):
        raise RunError(f"--record-keep: {s.record_keep} must be a whole number in [0, 1000]")
    if s.allow_from is not None or s.auth_key is not None:
        if not s.input_url.startswith("udp:"):
            opt = "--allow-from" if s.allow_from is not None else "--auth-key"
            raise RunError(f"{opt}: only with a udp:// input, got --input {s.input_url}")
    if s.learn_atmosphere and not s.profile:
        raise RunError("--learn-atmosphere: only with --profile (the profile's table "
                       "manager does the rebuilds)")
    if s.log_level not in LOG_LEVELS:
        raise RunError(f"--log-level: {s.log_level!r} must be one of {', '.join(LOG_LEVELS)}")


def check_loop_options(input_format: str, framing: str | None, rate_hz: float,
                       heartbeat_s: float, degraded_hold_s: float,
                       advisory_version: int) -> str:
    """Check the advisory loop's options; return the framing (its default resolved).

    The framing defaults to ``"datagram"`` for ``input_format "datagram"``, else
    ``"stream"``; ARINC 429 words may come either way.

    Raises
    ------
    ValueError
        Naming the first bad option and its value.
    """
    if input_format not in INPUT_FORMATS:
        raise ValueError(f"input_format must be one of {', '.join(INPUT_FORMATS)}, "
                         f"got {input_format!r}")
    if framing is None:
        framing = "datagram" if input_format == "datagram" else "stream"
    if framing not in FRAMINGS or (input_format != "arinc429" and framing != input_format):
        raise ValueError(f"framing {framing!r} does not fit input_format {input_format!r}")
    for name, v, hi in (("rate_hz", rate_hz, 1000.0), ("heartbeat_s", heartbeat_s, 3600.0),
                        ("degraded_hold_s", degraded_hold_s, 3600.0)):
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0 < v <= hi:
            raise ValueError(f"{name} must be a number in (0, {hi:g}], got {v!r}")
    if advisory_version not in (1, ADV_FORMAT_VERSION) or isinstance(advisory_version, bool):
        raise ValueError(f"advisory_version must be 1 or {ADV_FORMAT_VERSION}, got "
                         f"{advisory_version!r}")
    return framing


__all__ = ["CONFIG_KEYS", "CONFIG_PATH_KEYS", "EXIT_OK", "EXIT_RUNTIME", "EXIT_USAGE",
           "FRAMINGS", "INPUT_FORMATS", "LOG_LEVELS", "RunError", "RunSettings",
           "check_loop_options", "check_settings", "read_service_config"]
