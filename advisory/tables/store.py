"""The table file format (our own): a checked header with provenance, then numpy arrays.

Layout (all integers little-endian)::

    offset  size  content
    0       8     magic b"BOOMTBL\\x00"
    8       4     format version (uint32)
    12      4     header length H in bytes (uint32)
    16      H     header: UTF-8 JSON object (provenance, grid, array directory)
    16+H    32    SHA-256 of the header bytes
    48+H    ...   payload: the arrays' raw little-endian bytes, each starting on an
                  8-byte boundary, as listed in the header's ``arrays`` directory

The header holds ``format_version``, ``package_version``, ``build_utc``, the grid, the
aircraft and atmosphere inputs in full, and ``payload_sha256`` / ``payload_nbytes``.
Besides the table's own arrays the payload carries the atmosphere it was built from,
node by node (:func:`atmosphere_arrays`).
Loading refuses, each with its own message: a file that does not start with the magic
(foreign file), another format version, a header whose digest does not match, a payload
shorter or longer than declared (truncated or padded), and a payload whose SHA-256 does not
match (a flipped byte).

References
----------
FIPS PUB 180-4, Secure Hash Standard (SHA-256), NIST 2015.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import math
import mmap
import os
import struct
from pathlib import Path
from typing import BinaryIO

import numpy as np

from advisory.physics.atmosphere import Atmosphere

MAGIC = b"BOOMTBL\x00"
FORMAT_VERSION = 1
_PREFIX = struct.Struct("<8sII")
_ALIGN = 8


class TableFileError(ValueError):
    """A table file that is refused; the message says which check failed."""


def _pad(n: int) -> int:
    return (-n) % _ALIGN


def write_table_file(path: str | Path, header: dict, arrays: dict[str, np.ndarray]) -> str:
    """Write ``arrays`` with ``header`` to ``path`` atomically; returns the payload digest.

    The file is written to a temporary name beside ``path`` and renamed into place, so a
    reader never sees a half-written table.
    """
    directory = []
    chunks = []
    offset = 0
    for name, arr in arrays.items():
        a = np.ascontiguousarray(arr)
        if a.dtype.byteorder == ">":
            a = a.astype(a.dtype.newbyteorder("<"))
        raw = a.tobytes()
        directory.append({"name": name, "dtype": a.dtype.str, "shape": list(a.shape),
                          "offset": offset, "nbytes": len(raw)})
        chunks.append(raw + b"\x00" * _pad(len(raw)))
        offset += len(raw) + _pad(len(raw))
    payload = b"".join(chunks)
    digest = hashlib.sha256(payload).hexdigest()
    full = dict(header)
    full.update({"format_version": FORMAT_VERSION, "arrays": directory,
                 "payload_sha256": digest, "payload_nbytes": len(payload)})
    hbytes = json.dumps(full, sort_keys=True, separators=(",", ":")).encode("utf-8")
    path = Path(path)
    tmp = path.with_name(path.name + f".tmp{os.getpid()}")
    with open(tmp, "wb") as fh:
        fh.write(_PREFIX.pack(MAGIC, FORMAT_VERSION, len(hbytes)))
        fh.write(hbytes)
        fh.write(hashlib.sha256(hbytes).digest())
        fh.write(payload)
        fh.flush()
        os.fsync(fh.fileno())
    os.replace(tmp, path)
    return digest


def _header_from(fh: BinaryIO, size: int, path: Path) -> tuple[dict, int]:
    """The checked header of the open file ``fh`` and where its payload starts."""
    prefix = fh.read(_PREFIX.size)
    if len(prefix) < _PREFIX.size or prefix[:8] != MAGIC:
        raise TableFileError(f"table file {path}: not a boom-advisory table (bad magic)")
    _, version, hlen = _PREFIX.unpack_from(prefix)
    if version != FORMAT_VERSION:
        raise TableFileError(
            f"table file {path}: format version {version} is not supported "
            f"(this build reads version {FORMAT_VERSION}); rebuild the table"
        )
    end = _PREFIX.size + hlen
    if size < end + 32:
        raise TableFileError(f"table file {path}: truncated inside the header")
    hbytes = fh.read(hlen)
    if hashlib.sha256(hbytes).digest() != fh.read(32):
        raise TableFileError(f"table file {path}: header digest mismatch (header corrupted)")
    try:
        header = json.loads(hbytes.decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError, RecursionError) as exc:
        raise TableFileError(f"table file {path}: header is not valid JSON") from exc
    if not isinstance(header, dict):
        raise TableFileError(f"table file {path}: header is not a JSON object")
    return header, end + 32


def read_table_file(path: str | Path) -> tuple[dict, dict[str, np.ndarray]]:
    """Load a table file, checking magic, version, header digest, size and payload digest.

    The payload is hashed by reading the file, then mapped into memory read-only (the
    same open file, so what is mapped is what was hashed): the arrays' pages are read in
    as the lookups touch them, and :func:`release_pages` gives back those of a whole
    table after its load-time checks (the default table is 68 MB, of which a flight
    touches the few altitudes it flies at; loaded in full it was 69 MB of resident
    memory per table, 131 MB while loading).

    Returns
    -------
    (header, arrays)
        The provenance header and the arrays by name (read-only views).

    Raises
    ------
    TableFileError
        With a message naming the failed check.
    """
    path = Path(path)
    try:
        with open(path, "rb") as fh:
            size = os.fstat(fh.fileno()).st_size
            header, start = _header_from(fh, size, path)
            declared = header.get("payload_nbytes", -1)
            if not _count(declared):
                raise TableFileError(f"table file {path}: header key 'payload_nbytes' must "
                                     f"be a non-negative integer, got {declared!r}")
            have = size - start
            if have < declared:
                raise TableFileError(
                    f"table file {path}: truncated payload ({have} of {declared} bytes)")
            if have > declared:
                raise TableFileError(
                    f"table file {path}: {have - declared} unexpected bytes after the payload")
            digest = hashlib.sha256()
            while chunk := fh.read(1 << 20):
                digest.update(chunk)
            if digest.hexdigest() != header.get("payload_sha256"):
                raise TableFileError(
                    f"table file {path}: payload SHA-256 mismatch (file corrupted or altered)")
            mapped = (mmap.mmap(fh.fileno(), 0, access=mmap.ACCESS_READ) if declared
                      else b"")
    except OSError as exc:
        raise TableFileError(f"table file {path}: cannot read ({exc.strerror})") from exc
    arrays = {}
    directory = header.get("arrays")
    if not isinstance(directory, list):
        raise TableFileError(f"table file {path}: header key 'arrays' must be a list")
    for entry in directory:
        name, dtype, shape, offset = _directory_entry(entry, declared, path)
        a = np.frombuffer(mapped, dtype=dtype, count=math.prod(shape), offset=start + offset)
        arrays[name] = a.reshape(shape)
    return header, arrays


def release_pages(arrays: dict[str, np.ndarray]) -> None:
    """Give back the resident pages of a mapped table (:func:`read_table_file`); they are
    read in again from the file as they are touched. Nothing for arrays in memory."""
    seen: set[int] = set()
    for a in arrays.values():
        base: object = a
        while isinstance(base, np.ndarray):
            base = base.base
        if isinstance(base, memoryview):
            base = base.obj
        if isinstance(base, mmap.mmap) and id(base) not in seen and hasattr(base, "madvise"):
            seen.add(id(base))
            with contextlib.suppress(OSError, ValueError):
                base.madvise(mmap.MADV_DONTNEED)


def _directory_entry(entry: object, payload_nbytes: int,
                     path: str | Path) -> tuple[str, np.dtype, tuple[int, ...], int]:
    """One checked entry of the header's array directory: (name, dtype, shape, offset).

    The array must be a plain little-endian float or integer array lying wholly inside
    the payload, with ``nbytes`` equal to its shape times its item size.
    """
    where = f"table file {path}: array directory"
    if not isinstance(entry, dict) or not isinstance(entry.get("name"), str):
        raise TableFileError(f"{where}: an entry is not an object with a 'name'")
    name = entry["name"]
    try:
        if not isinstance(entry.get("dtype"), str):
            raise TypeError
        dtype = np.dtype(entry["dtype"])
    except TypeError:
        raise TableFileError(f"{where}: array {name}: dtype {entry.get('dtype')!r} is not "
                             "a numpy dtype") from None
    if dtype.kind not in "fiu" or dtype.byteorder == ">":
        raise TableFileError(f"{where}: array {name}: dtype {dtype.str} is not a "
                             "little-endian number type")
    shape, offset, nbytes = entry.get("shape"), entry.get("offset", -1), entry.get("nbytes", -1)
    if (not isinstance(shape, list) or not all(_count(n) for n in shape)
            or not _count(offset) or not _count(nbytes)):
        raise TableFileError(f"{where}: array {name}: shape {shape!r}, offset {offset!r} "
                             f"or nbytes {nbytes!r} is not made of non-negative integers")
    if math.prod(shape) * dtype.itemsize != nbytes or offset + nbytes > payload_nbytes:
        raise TableFileError(f"{where}: array {name}: shape {shape} of {dtype.str} does not "
                             f"fit nbytes {nbytes} at offset {offset} in a payload of "
                             f"{payload_nbytes} bytes")
    return str(name), dtype, tuple(int(n) for n in shape), int(offset)


def _count(v: object) -> bool:
    return isinstance(v, int) and not isinstance(v, bool) and v >= 0


#: Atmosphere fields stored in a table's payload, each as the array ``atm_<field>``.
ATMOSPHERE_FIELDS = ("z_m", "temperature_k", "pressure_pa", "density_kgm3", "sound_speed_mps",
                     "wind_east_mps", "wind_north_mps")


def atmosphere_arrays(atm: Atmosphere) -> dict[str, np.ndarray]:
    """The atmosphere in full, as payload arrays (``atm_<field>``)."""
    return {f"atm_{name}": np.asarray(getattr(atm, name), dtype=np.float64)
            for name in ATMOSPHERE_FIELDS}


def atmosphere_from_arrays(arrays: dict[str, np.ndarray], description: dict) -> Atmosphere:
    """Inverse of :func:`atmosphere_arrays` (``description`` from the table header)."""
    return Atmosphere(**{name: np.array(arrays[f"atm_{name}"]) for name in ATMOSPHERE_FIELDS},
                      description=dict(description))
