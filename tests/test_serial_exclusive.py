"""Serial ports are opened exclusively: a second reader cannot steal bytes (issue 15, Low).

Real pseudo-terminal pairs (``os.openpty``); no mocks. Expected behaviour: the interface
document's serial URL row (``docs/interface.md`` section 12) as amended by issue 15:
``exclusive`` defaults to 1, and a refused open is one line that names the port and says
another program holds it (common practice, no source: a serial line has one reader).
"""

from __future__ import annotations

import os
import time

import pytest

from advisory.io.transports import TransportError, open_transport


@pytest.fixture
def pty_name():
    master, slave = os.openpty()
    yield master, os.ttyname(slave)
    for fd in (master, slave):
        try:
            os.close(fd)
        except OSError:
            pass


def test_second_open_of_a_port_is_refused_with_one_line(pty_name):
    master, name = pty_name
    first = open_transport(f"serial://{name}", "input")
    try:
        with pytest.raises(TransportError) as err:
            open_transport(f"serial://{name}", "input")
        msg = str(err.value)
        assert "\n" not in msg
        assert name in msg
        assert "in use" in msg and "exclusive" in msg
        # the first reader still gets every byte
        os.write(master, b"abc")
        got = b""
        end = time.monotonic() + 2.0
        while len(got) < 3 and time.monotonic() < end:
            got += first.receive(time.monotonic() + 0.2) or b""
        assert got == b"abc"
    finally:
        first.close()
    # once the first closed, the port opens again
    again = open_transport(f"serial://{name}", "input")
    again.close()


def test_exclusive_0_shares_the_port_on_request(pty_name):
    _master, name = pty_name
    a = open_transport(f"serial://{name}?exclusive=0", "input")
    b = open_transport(f"serial://{name}?exclusive=0", "input")
    a.close()
    b.close()
