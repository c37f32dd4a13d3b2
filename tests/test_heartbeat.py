"""The terminal progress line of long commands (selector.cli.heartbeat): shown only when enabled,
with the search's live counters, and cleared at the end (project convention, no outside source)."""

from __future__ import annotations

import io
import time

import pytest

from selector.cli import heartbeat as hb
from selector.engine import search


def test_heartbeat_shows_elapsed_time_limit_and_counters_then_clears(monkeypatch):
    monkeypatch.setattr(hb, "DELAY_S", 0.0)
    monkeypatch.setattr(hb, "PERIOD_S", 0.01)
    monkeypatch.setitem(search.LIVE, "stats", {"blocks": 3, "refined": 0, "evaluated": 12345})
    out = io.StringIO()
    with hb.heartbeat("solving", True, limit_s=60, stream=out):
        deadline = time.monotonic() + 5.0
        while "blocks" not in out.getvalue() and time.monotonic() < deadline:
            time.sleep(0.01)
    text = out.getvalue()
    assert "solving: 0 s of 60 s limit, 12,345 designs evaluated exactly, 3 blocks" in text
    last = text.rsplit("\r", 2)
    assert last[-1] == "" and last[-2].strip() == ""  # the line is blanked and the cursor returned


def test_heartbeat_is_silent_when_disabled_or_quick(monkeypatch):
    out = io.StringIO()
    with hb.heartbeat("solving", False, stream=out):
        pass
    monkeypatch.setattr(hb, "DELAY_S", 30.0)
    with hb.heartbeat("solving", True, stream=out):
        pass  # finished before the delay: nothing shown
    assert out.getvalue() == ""


@pytest.mark.parametrize("fmt, tty, shown", [("table", True, True), ("json", True, False), ("table", False, False)])
def test_heartbeat_only_for_tables_on_a_terminal(monkeypatch, fmt, tty, shown):
    class Args:
        format = fmt

    monkeypatch.setattr(hb.sys.stderr, "isatty", lambda: tty, raising=False)
    assert hb.wanted(Args()) is shown
