"""Wire side of the live loop: framing, CRC, frames, ARINC 429, transports, recorder.

The interface control document is ``docs/interface.md``; the C binding for the other
side of the wire is in ``bindings/c``.

Notes
-----
The numba kernels here are cached per source file (``njit(cache=True)``); numba does
not notice when a kernel's callee in another file changes, so after editing
``crc32c.py`` delete ``advisory/wire/__pycache__/*.nbi`` / ``*.nbc`` (a fresh clone
has no cache).
"""

from advisory.io.cobs import CobsError, cobs_decode, cobs_encode
from advisory.io.crc32c import crc32c
from advisory.io.messages import (
    FORMAT_VERSION,
    MAX_PAYLOAD,
    DatagramReader,
    Frame,
    FrameDecoder,
    FrameError,
    StreamDeframer,
    datagram,
    decode_frame,
    encode_adv,
    encode_air,
    encode_status,
    frame_stream,
    next_seq,
    parse_datagram,
)
from advisory.io.records import Recorder, RecordReader, read_records
from advisory.io.transports import (
    FramedLink,
    SendBufferFullError,
    TransportError,
    make_transport,
    open_transport,
)

__all__ = [
    "FORMAT_VERSION",
    "MAX_PAYLOAD",
    "CobsError",
    "DatagramReader",
    "Frame",
    "FrameDecoder",
    "FrameError",
    "FramedLink",
    "RecordReader",
    "Recorder",
    "SendBufferFullError",
    "StreamDeframer",
    "TransportError",
    "cobs_decode",
    "cobs_encode",
    "crc32c",
    "datagram",
    "decode_frame",
    "encode_adv",
    "encode_air",
    "encode_status",
    "frame_stream",
    "make_transport",
    "next_seq",
    "open_transport",
    "parse_datagram",
    "read_records",
]
