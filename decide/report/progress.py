"""A progress indicator on stderr for work that takes more than about a second."""

from __future__ import annotations

import threading
from collections.abc import Iterator
from contextlib import contextmanager

from rich.console import Console

#: Seconds of work before the indicator appears; quicker work shows nothing.
DELAY = 1.0


@contextmanager
def busy(message: str, enabled: bool = True, console: Console | None = None, delay: float = DELAY) -> Iterator[None]:
    """Show a transient spinner with ``message`` on stderr while the block runs.

    Nothing is shown when ``enabled`` is false (machine output), when stderr
    is not a terminal, or when the block ends within ``delay`` seconds.  The
    spinner is erased when the block ends, so stdout stays clean.
    """
    con = console or Console(stderr=True, markup=False, emoji=False, highlight=False)
    if not enabled or not con.is_terminal:
        yield
        return
    status = con.status(message)
    lock = threading.Lock()
    done = [False]

    def start() -> None:
        with lock:
            if not done[0]:
                status.start()

    timer = threading.Timer(delay, start)
    timer.daemon = True
    if delay <= 0:
        start()
    else:
        timer.start()
    try:
        yield
    finally:
        with lock:
            done[0] = True
            timer.cancel()
            status.stop()
