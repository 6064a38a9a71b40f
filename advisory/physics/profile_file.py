"""User atmosphere profile files (CSV or TOML): the levels they name, read into an
:class:`~advisory.physics.atmosphere.Atmosphere`; also the ensemble files' members
(:mod:`advisory.physics.spread`) use :func:`level_from_row`.

Units: columns in feet or metres, Celsius or kelvin, knots or m/s, as named below;
converted with the exact definitions of :mod:`advisory.units` (NIST SP 811).
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

from advisory import units
from advisory.physics.atmosphere import (
    Atmosphere,
    AtmosphereError,
    ProfileLevel,
    atmosphere_from_levels,
)
from advisory.tomlfile import parse_toml

__all__ = ["load_profile", "level_from_row"]

_ALT_COLUMNS = {"alt_m": 1.0, "alt_ft": units.FT}
_WIND_COMPONENT_COLUMNS = {
    ("wind_east_mps", "wind_north_mps"): 1.0,
    ("wind_east_kt", "wind_north_kt"): units.KT,
}


def level_from_row(row: dict[str, float], where: str) -> ProfileLevel:
    """Turn one row of named values into a :class:`ProfileLevel` (SI)."""
    alt = None
    for name, scale in _ALT_COLUMNS.items():
        if name in row:
            alt = row[name] * scale
    if alt is None:
        raise AtmosphereError(f"{where}: needs an altitude column (alt_ft or alt_m)")
    if "temp_c" in row:
        temp = units.c_to_k(row["temp_c"])
    elif "temp_k" in row:
        temp = row["temp_k"]
    else:
        raise AtmosphereError(f"{where}: needs a temperature column (temp_c or temp_k)")
    east = north = 0.0
    found = False
    for (ce, cn), scale in _WIND_COMPONENT_COLUMNS.items():
        if ce in row or cn in row:
            east, north = row.get(ce, 0.0) * scale, row.get(cn, 0.0) * scale
            found = True
    if not found and ("wind_from_deg" in row or "wind_kt" in row):
        if "wind_from_deg" not in row or "wind_kt" not in row:
            raise AtmosphereError(f"{where}: wind_from_deg and wind_kt go together")
        east, north = units.wind_from_to_components(row["wind_from_deg"], row["wind_kt"] * units.KT)
    return ProfileLevel(alt, temp, east, north)


def load_profile(path: str | Path, temp_offset_k: float = 0.0) -> Atmosphere:
    """Read a user profile from a CSV or TOML file.

    CSV: a header row naming the columns, then one level per row. TOML: an array of
    tables ``[[level]]`` with the same keys. Columns/keys: ``alt_ft`` or ``alt_m``;
    ``temp_c`` or ``temp_k``; optional wind as ``wind_east_kt``/``wind_north_kt``,
    ``wind_east_mps``/``wind_north_mps`` (velocity of the air toward east/north) or
    ``wind_from_deg``/``wind_kt`` (meteorological: the direction it blows from).

    Raises
    ------
    AtmosphereError
        Unreadable file, unknown format, bad number, or a profile that
        :func:`atmosphere_from_levels` refuses; the message names the file and row.
    """
    path = Path(path)
    if path.suffix.lower() not in (".csv", ".toml"):
        raise AtmosphereError(f"atmosphere file {path}: unknown format (use .csv or .toml)")
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise AtmosphereError(f"atmosphere file {path}: cannot read ({exc.strerror})") from exc
    except UnicodeDecodeError as exc:
        raise AtmosphereError(f"atmosphere file {path}: not UTF-8 text ({exc.reason} at byte "
                              f"{exc.start})") from exc
    rows: list[dict[str, float]] = []
    if path.suffix.lower() == ".toml":
        doc = parse_toml(text, f"atmosphere file {path}", AtmosphereError)
        raw_rows = doc.get("level")
        if not isinstance(raw_rows, list):
            raise AtmosphereError(f"atmosphere file {path}: needs [[level]] tables")
        for i, raw in enumerate(raw_rows):
            if not isinstance(raw, dict):
                raise AtmosphereError(f"atmosphere file {path}: level {i}: {raw!r} is not a "
                                      "table of named values ([[level]] tables)")
            row = {}
            for k, v in raw.items():
                if not isinstance(v, (int, float)) or isinstance(v, bool) or not math.isfinite(v):
                    raise AtmosphereError(f"atmosphere file {path}: level {i}: {k} = {v!r} "
                                          "is not a finite number")
                row[k] = float(v)
            rows.append(row)
    else:
        reader = csv.DictReader(line for line in text.splitlines() if not line.startswith("#"))
        for i, raw in enumerate(reader):
            row = {}
            for k, v in raw.items():
                if k is None or v is None or not k.strip():
                    continue
                try:
                    row[k.strip()] = float(v)
                    if not math.isfinite(row[k.strip()]):
                        raise ValueError(v)
                except ValueError as exc:
                    raise AtmosphereError(
                        f"atmosphere file {path}: row {i + 1}: {k.strip()} = {v!r} is not a "
                        "finite number"
                    ) from exc
            rows.append(row)
    levels = [
        level_from_row(r, f"atmosphere file {path}: row {i + 1}") for i, r in enumerate(rows)
    ]
    try:
        return atmosphere_from_levels(levels, temp_offset_k, source=str(path))
    except AtmosphereError as exc:
        raise AtmosphereError(f"atmosphere file {path}: {exc}") from exc
