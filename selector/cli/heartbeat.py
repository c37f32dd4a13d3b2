"""A one-line progress display on the terminal for commands that can run long (solve, shortlist, frontier).

After `DELAY_S` a background thread rewrites one line on stderr once a second: elapsed time, the time
limit when one is set, and the counters of the search running at that moment (designs evaluated,
blocks opened; `selector.engine.search.LIVE`). Nothing is shown when stderr is not a terminal or the
output is JSON, so piped and machine-read output never contains it; the line is cleared when the
command ends (or is interrupted).
"""

from __future__ import annotations

import sys
import threading
import time
from contextlib import contextmanager

DELAY_S = 2.0
"""No display for commands that finish sooner than this [s]."""
PERIOD_S = 1.0
"""Refresh period of the line [s]."""


def _line(label: str, elapsed_s: float, limit_s: float | None) -> str:
    from selector.engine.search import LIVE

    text = f"{label}: {elapsed_s:.0f} s"
    if limit_s is not None:
        text += f" of {limit_s:g} s limit"
    stats = LIVE.get("stats") or {}
    if stats.get("evaluated"):
        text += f", {stats['evaluated']:,} designs evaluated exactly"
    if stats.get("blocks"):
        text += f", {stats['blocks']:,} blocks"
    return text


@contextmanager
def heartbeat(label: str, enabled: bool, limit_s: float | None = None, stream=None):
    """Show ``label: N s ...`` on ``stream`` (stderr) while the body runs, when ``enabled``.

    Parameters
    ----------
    label : str
        What is running (e.g. ``"solving"``).
    enabled : bool
        False: do nothing (JSON output, or stderr not a terminal).
    limit_s : float or None
        The command's time limit, shown beside the elapsed time [s].
    stream : file or None
        Where to write (default ``sys.stderr``).
    """
    if not enabled:
        yield
        return
    out = stream if stream is not None else sys.stderr
    stop = threading.Event()
    t0 = time.monotonic()
    shown = [0]

    def beat():
        if stop.wait(DELAY_S):
            return
        while not stop.is_set():
            text = _line(label, time.monotonic() - t0, limit_s)
            out.write("\r" + text.ljust(shown[0]))
            out.flush()
            shown[0] = len(text)
            stop.wait(PERIOD_S)

    thread = threading.Thread(target=beat, name="selector-heartbeat", daemon=True)
    thread.start()
    try:
        yield
    finally:
        stop.set()
        thread.join()
        if shown[0]:
            out.write("\r" + " " * shown[0] + "\r")
            out.flush()


def wanted(args) -> bool:
    """True when the command prints tables to a terminal (stderr a TTY, not ``--format json``)."""
    return getattr(args, "format", "table") != "json" and sys.stderr.isatty()
