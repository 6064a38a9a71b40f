"""ARINC 429 label maps from TOML files: which label feeds which air-data field.

The format (``docs/interface.md``, "ARINC 429 input") is given in
:func:`parse_label_map`; a file adds to or replaces :data:`advisory.io.arinc429.DEFAULT_LABELS`.
Bad entries are refused with one message naming the file, the label and the key (numbers
must be finite: TOML's ``nan`` and ``inf`` are refused).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from advisory.io.arinc429 import DEFAULT_LABELS, LabelMap, LabelSpec, label_from_octal
from advisory.schema import AIR_FIELDS
from advisory.tomlfile import parse_toml

_SPEC_KEYS = {"field", "encoding", "sig_bits", "range", "digits", "resolution", "sdi",
              "wrap_360", "scale", "offset"}


def parse_label_map(text: str, source: str = "label map") -> LabelMap:
    """Read a TOML label map.

    The format (all top-level keys optional)::

        byte_order = "big"          # or "little"
        label_bit_reversed = true
        replace_defaults = false    # true: only the labels below
        [labels.203]
        field = "alt_ft"
        encoding = "bnr"            # or "bcd"
        sig_bits = 17
        range = 131072.0
        # bcd: digits = 5, resolution = 1.0; any: sdi = 1, wrap_360 = true,
        # scale = 1.0, offset = 0.0

    Raises
    ------
    ValueError
        Any bad entry; the message names the source, the label and the key.
    """
    doc = parse_toml(text, source, ValueError)
    unknown = set(doc) - {"byte_order", "label_bit_reversed", "replace_defaults", "labels"}
    if unknown:
        raise ValueError(f"{source}: unknown key {sorted(unknown)[0]!r}")
    order = doc.get("byte_order", "big")
    if order not in ("big", "little"):
        raise ValueError(f"{source}: byte_order must be 'big' or 'little', got {order!r}")
    reversed_ = doc.get("label_bit_reversed", True)
    if not isinstance(reversed_, bool):
        raise ValueError(f"{source}: label_bit_reversed must be true or false, "
                         f"got {reversed_!r}")
    labels = {} if doc.get("replace_defaults", False) else dict(DEFAULT_LABELS)
    entries = doc.get("labels", {})
    if not isinstance(entries, Mapping):
        raise ValueError(f"{source}: [labels] must be a table")
    for key, entry in entries.items():
        where = f"{source}: label {key}"
        try:
            num = label_from_octal(key)
        except ValueError as exc:
            raise ValueError(f"{where}: {exc}") from None
        if not isinstance(entry, Mapping):
            raise ValueError(f"{where}: must be a table")
        bad = set(entry) - _SPEC_KEYS
        if bad:
            raise ValueError(f"{where}: unknown key {sorted(bad)[0]!r}")
        labels[num] = _spec_from_entry(num, entry, where)
    return LabelMap(labels, order, reversed_)


def _spec_from_entry(num: int, e: Mapping[str, Any], where: str) -> LabelSpec:
    name = e.get("field")
    if name not in AIR_FIELDS:
        raise ValueError(f"{where}: field must be one of {', '.join(AIR_FIELDS)}, got {name!r}")
    enc = e.get("encoding", "bnr")
    if enc not in ("bnr", "bcd"):
        raise ValueError(f"{where}: encoding must be 'bnr' or 'bcd', got {enc!r}")

    def num_of(key: str, default: float, kind: type = float) -> Any:
        v = e.get(key, default)
        if isinstance(v, bool) or not isinstance(v, (int, float)) or (
                kind is int and not isinstance(v, int)):
            raise ValueError(f"{where}: {key} must be a {kind.__name__}, got {v!r}")
        if not math.isfinite(v):  # TOML allows nan and inf; no scaling means them
            raise ValueError(f"{where}: {key} must be a finite number, got {v!r}")
        return kind(v)

    sig = num_of("sig_bits", 18, int)
    if not 1 <= sig <= 20:
        raise ValueError(f"{where}: sig_bits must be 1..20, got {sig}")
    digits = num_of("digits", 5, int)
    if not 1 <= digits <= 5:
        raise ValueError(f"{where}: digits must be 1..5, got {digits}")
    rng = num_of("range", 1.0)
    res = num_of("resolution", 1.0)
    if enc == "bnr" and "range" not in e:
        raise ValueError(f"{where}: a bnr label needs range")
    if rng <= 0 or res <= 0:
        raise ValueError(f"{where}: range and resolution must be positive")
    sdi = e.get("sdi")
    if sdi is not None and (isinstance(sdi, bool) or sdi not in (0, 1, 2, 3)):
        raise ValueError(f"{where}: sdi must be 0..3, got {sdi!r}")
    if sdi is not None and enc == "bnr" and sig > 18:
        raise ValueError(f"{where}: sdi cannot be checked when sig_bits > 18 (bits 9-10 "
                         "carry data)")
    wrap = e.get("wrap_360", False)
    if not isinstance(wrap, bool):
        raise ValueError(f"{where}: wrap_360 must be true or false, got {wrap!r}")
    scale = num_of("scale", 1.0)
    if scale == 0.0:
        raise ValueError(f"{where}: scale must not be 0 (every value would read 0)")
    return LabelSpec(num, name, enc, sig, rng, digits, res, sdi, wrap,
                     scale, num_of("offset", 0.0))


def load_label_map(path: str | Path | None = None) -> LabelMap:
    """The label map from a TOML file, or the defaults when ``path`` is None."""
    if path is None:
        return LabelMap()
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise ValueError(f"cannot read ARINC 429 label map {str(p)!r}: {exc}") from None
    return parse_label_map(text, source=str(p))


def label_map_of(label_map: LabelMap | str | Path | None) -> LabelMap | None:
    """The label map from an object or a TOML file (None stays None: the built-in map).

    Raises
    ------
    ValueError
        ``label_map`` is neither, or its file cannot be read or parsed.
    """
    if label_map is None or isinstance(label_map, LabelMap):
        return label_map
    if isinstance(label_map, (str, Path)):
        return load_label_map(label_map)
    raise ValueError(f"label_map must be a LabelMap or a file path, got {label_map!r}")
