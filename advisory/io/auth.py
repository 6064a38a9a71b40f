"""Authenticated frames: the ``"auth"`` entry (HMAC-SHA256 tag) a signed frame carries as
the last key of its map, added by :func:`sign_payload` and checked by :func:`check_auth`
(``docs/interface.md`` section 7.1; the C binding in ``bindings/c`` signs and checks the
same bytes).

References
----------
RFC 2104 (HMAC), FIPS 180-4 (SHA-256); test vectors of RFC 4231 in ``tests/test_hmac.py``.
"""

from __future__ import annotations

import hmac

from advisory.schema import AUTH_KEY, AUTH_TAG_LEN, MAX_PAYLOAD

__all__ = ["AUTH_TRAILER", "auth_tag", "sign_payload", "check_auth"]

#: What precedes the tag at the end of a signed payload: the key ``"auth"`` (fixstr 4)
#: and the header of a 32-byte MessagePack bin 8 (``docs/interface.md`` section 7.1).
AUTH_TRAILER = b"\xa4" + AUTH_KEY.encode("ascii") + b"\xc4" + bytes([AUTH_TAG_LEN])


def auth_tag(key: bytes, signed_part: bytes) -> bytes:
    """HMAC-SHA256 of ``signed_part`` under ``key`` (RFC 2104; SHA-256: FIPS 180-4)."""
    return hmac.digest(key, signed_part, "sha256")  # the one-shot C path of hmac


def sign_payload(payload: bytes, key: bytes) -> bytes:
    """Add the authentication entry ``"auth": bin(32)`` as the last key of a frame's map.

    The map's entry count grows by one (a fixmap of 15 entries becomes a map 16), then
    the key ``"auth"`` and a bin 8 header follow the existing entries, and the tag is
    HMAC-SHA256 over every byte before it (``docs/interface.md`` section 7.1).

    Parameters
    ----------
    payload : bytes
        An encoded frame (a MessagePack map, as the encoders write it).
    key : bytes
        The shared key (at least 32 bytes, RFC 2104 section 3).

    Returns
    -------
    bytes
        The signed payload (39 + 32 bytes longer, 2 more when the map header grows).

    Raises
    ------
    ValueError
        ``payload`` does not start with a map header, or the result would exceed
        :data:`MAX_PAYLOAD`.
    """
    payload = bytes(payload)
    b0 = payload[:1]
    if b0 and 0x80 <= b0[0] <= 0x8E:
        head, body = bytes([b0[0] + 1]), payload[1:]
    elif b0 == b"\x8f":
        head, body = b"\xde\x00\x10", payload[1:]
    elif b0 == b"\xde" and len(payload) >= 3 and payload[1:3] != b"\xff\xff":
        head = b"\xde" + (int.from_bytes(payload[1:3], "big") + 1).to_bytes(2, "big")
        body = payload[3:]
    else:
        raise ValueError("payload is not a MessagePack map with room for one more entry")
    signed = head + body + AUTH_TRAILER
    if len(signed) + AUTH_TAG_LEN > MAX_PAYLOAD:
        raise ValueError(f"signed frame would exceed MAX_PAYLOAD={MAX_PAYLOAD}")
    return signed + auth_tag(key, signed)


def check_auth(payload: bytes, key: bytes) -> str:
    """Check a signed payload's tag in constant time (:func:`hmac.compare_digest`).

    Returns
    -------
    str
        ``""`` when the tag is valid; ``"auth_missing"`` when the payload does not end
        with an authentication entry; ``"auth_bad"`` when the tag does not match.
    """
    n = len(payload)
    if n < len(AUTH_TRAILER) + AUTH_TAG_LEN + 1 or \
            payload[n - AUTH_TAG_LEN - len(AUTH_TRAILER):n - AUTH_TAG_LEN] != AUTH_TRAILER:
        return "auth_missing"
    good = auth_tag(key, bytes(payload[:n - AUTH_TAG_LEN]))
    return "" if hmac.compare_digest(good, bytes(payload[n - AUTH_TAG_LEN:])) else "auth_bad"
