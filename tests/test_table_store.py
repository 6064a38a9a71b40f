"""Table file format: round trip and each refusal with its own message."""

from __future__ import annotations

import struct

import numpy as np
import pytest

from advisory.tables import store
from advisory.tables.store import TableFileError, read_table_file, write_table_file


def sample_arrays() -> dict[str, np.ndarray]:
    rng = np.random.default_rng(7)
    return {
        "a": rng.normal(size=(3, 4, 5)),
        "b": np.arange(7, dtype=np.int32),
        "c": rng.normal(size=(2, 1, 3, 1, 5, 9)),
    }


def write_sample(path) -> dict[str, np.ndarray]:
    arrays = sample_arrays()
    write_table_file(path, {"kind": "boom-advisory table", "note": "test"}, arrays)
    return arrays


def test_round_trip(tmp_path) -> None:
    path = tmp_path / "t.boomtable"
    arrays = write_sample(path)
    header, back = read_table_file(path)
    assert header["note"] == "test"
    assert header["format_version"] == store.FORMAT_VERSION
    for name, arr in arrays.items():
        np.testing.assert_array_equal(back[name], arr)
        assert back[name].dtype == arr.dtype


def test_flipped_payload_byte_is_refused(tmp_path) -> None:
    path = tmp_path / "t.boomtable"
    write_sample(path)
    data = bytearray(path.read_bytes())
    data[-20] ^= 0x01
    path.write_bytes(bytes(data))
    with pytest.raises(TableFileError, match="payload SHA-256 mismatch"):
        read_table_file(path)


def test_flipped_header_byte_is_refused(tmp_path) -> None:
    path = tmp_path / "t.boomtable"
    write_sample(path)
    data = bytearray(path.read_bytes())
    data[30] ^= 0x20
    path.write_bytes(bytes(data))
    with pytest.raises(TableFileError, match="header digest mismatch"):
        read_table_file(path)


def test_truncated_file_is_refused(tmp_path) -> None:
    path = tmp_path / "t.boomtable"
    write_sample(path)
    data = path.read_bytes()
    path.write_bytes(data[:-100])
    with pytest.raises(TableFileError, match="truncated payload"):
        read_table_file(path)
    path.write_bytes(data[:40])
    with pytest.raises(TableFileError, match="truncated inside the header"):
        read_table_file(path)


def test_other_format_version_is_refused(tmp_path) -> None:
    path = tmp_path / "t.boomtable"
    write_sample(path)
    data = bytearray(path.read_bytes())
    struct.pack_into("<I", data, 8, store.FORMAT_VERSION + 1)
    path.write_bytes(bytes(data))
    with pytest.raises(TableFileError, match="format version 2 is not supported"):
        read_table_file(path)


def test_foreign_file_is_refused(tmp_path) -> None:
    path = tmp_path / "foreign.bin"
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + b"\x00" * 100)
    with pytest.raises(TableFileError, match="bad magic"):
        read_table_file(path)
    with pytest.raises(TableFileError, match="cannot read"):
        read_table_file(tmp_path / "missing.boomtable")


def test_write_is_atomic(tmp_path) -> None:
    path = tmp_path / "t.boomtable"
    write_sample(path)
    assert [p.name for p in tmp_path.iterdir()] == ["t.boomtable"]
