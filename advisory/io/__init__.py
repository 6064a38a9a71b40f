"""Wire side of the live loop: framing, CRC, frames, ARINC 429, transports, recorder.

Modules, in the order bytes flow: :mod:`~advisory.io.transports` (one module per URL
scheme), :mod:`~advisory.io.framing` (COBS + CRC-32C streams, datagrams; built on
:mod:`~advisory.io.cobs` and :mod:`~advisory.io.crc32c`), :mod:`~advisory.io.messages`
(frame encoders and decoder; :mod:`~advisory.io.frame_rules` holds the decoding rules,
:mod:`~advisory.io.air_fastpath` the canonical air-frame kernel),
:mod:`~advisory.io.arinc429` (ARINC 429 words; label maps from files in
:mod:`~advisory.io.arinc429_labels`) and :mod:`~advisory.io.records` (record files).
The wire facts (field names, limits, reason codes) live in :mod:`advisory.schema`.

The interface control document is ``docs/interface.md``; the C binding for the other
side of the wire is in ``bindings/c``.

Notes
-----
The numba kernels here are ``njit(cache=True)``; :mod:`advisory.jit` owns the cache
policy (it drops cached machine code when any kernel source of the package changes).
"""

from advisory.io.cobs import CobsError, cobs_decode, cobs_encode
from advisory.io.crc32c import crc32c
from advisory.io.framing import (
    DatagramReader,
    StreamDeframer,
    datagram,
    frame_stream,
    parse_datagram,
)
from advisory.io.messages import (
    Frame,
    FrameDecoder,
    FrameError,
    decode_frame,
    encode_adv,
    encode_air,
    encode_status,
    next_seq,
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
