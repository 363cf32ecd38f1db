"""A watchdog for calls that once spun for ever: a regression fails the test instead of hanging it."""

from __future__ import annotations

import multiprocessing
from collections.abc import Callable
from multiprocessing.connection import Connection
from typing import Any

import pytest

from models.exceptions import StaffingError

#: Seconds a refused call may take before the test says it spins. Generous on purpose: this is a
#: watchdog against endless loops, not a timing check.
WATCHDOG_SECONDS = 10.0


def _answer(conn: Connection, call: Callable[[], Any]) -> None:
    try:
        call()
    except StaffingError as exc:
        conn.send(("StaffingError", str(exc)))
    except BaseException as exc:  # reported to the parent, which fails the test
        conn.send((type(exc).__name__, str(exc)))
    else:
        conn.send(("returned", ""))


def refusal(call: Callable[[], Any]) -> str:
    """Run ``call`` in a forked child and return the message of the StaffingError it raises.

    The child is killed after :data:`WATCHDOG_SECONDS`: a call that spins fails the test, and
    its CPU is freed, rather than keeping the test run waiting for ever.
    """
    context = multiprocessing.get_context("fork")
    receive, send = context.Pipe(duplex=False)
    child = context.Process(target=_answer, args=(send, call), daemon=True)
    child.start()
    try:
        if not receive.poll(WATCHDOG_SECONDS):
            pytest.fail(f"no answer within {WATCHDOG_SECONDS:g} s: the call spins")
        kind, message = receive.recv()
    finally:
        child.kill()
        child.join()
    assert kind == "StaffingError", f"expected a StaffingError, got {kind}: {message}"
    return str(message)
