"""TOML files, read in one place: the Python-version switch (the standard library's
``tomllib`` from 3.11, the ``tomli`` backport on 3.10) and one wording for the two ways a
file fails (it cannot be read; it is not valid TOML), each naming the file.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - Python 3.10
    import tomli as tomllib

__all__ = ["parse_toml", "read_toml", "tomllib"]


def parse_toml(text: str, what: str, error: type[Exception]) -> dict[str, Any]:
    """The document in ``text``; ``error("<what>: not valid TOML (...)")`` if it is not TOML.

    Parameters
    ----------
    text : str
    what : str
        What the text is, for the message (e.g. ``"grid file /x/grid.toml"``).
    error : type of Exception
        The caller's error type (a ``ValueError`` subclass).
    """
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise error(f"{what}: not valid TOML ({exc})") from exc


def read_toml(path: str | Path, what: str, error: type[Exception]) -> dict[str, Any]:
    """Read and parse a TOML file; ``error("<what>: cannot read (...)")`` if it cannot be
    read, ``error("<what>: not valid TOML (...)")`` if it is not TOML."""
    try:
        text = Path(path).read_text(encoding="utf-8")
    except OSError as exc:
        raise error(f"{what}: cannot read ({exc.strerror})") from exc
    return parse_toml(text, what, error)
