"""Honouring a cancel that a protocol library swallowed.

On Python 3.11, ``asyncio.wait_for`` and pymodbus can both drop a cancel that lands in the
same loop turn as the awaited call completes (always so for a refused connect on
loopback): the task's ``cancelling()`` count says it was asked to stop, but no
``CancelledError`` arrives. A source that then sleeps and reconnects never stops. Every
source calls ``raise_if_cancelling`` after a library call and before it waits to retry.
"""

from __future__ import annotations

import asyncio

__all__ = ["cancelling", "raise_if_cancelling"]


def cancelling() -> bool:
    """True when the running task has been asked to stop."""
    task = asyncio.current_task()
    return task is not None and task.cancelling() > 0


def raise_if_cancelling() -> None:
    """Raise ``CancelledError`` when the running task was asked to stop."""
    if cancelling():
        raise asyncio.CancelledError
