"""Interrupts, worker processes and resource guards of the command line (issue: reliability).

SIGTERM and Ctrl-C stop a running sweep with one line and exit 143 / 130, and no worker process
is left; a lost worker, a bad Dask address and oversized sweeps are bad input (exit 2); writers
leave no temporary file when interrupted. Timeouts only detect hangs; nothing is timed.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from hostile import ROOT, assert_clean_answer, make_study, run_cli

from selector.errors import Terminated
from selector.io.export import atomic_write


def _children(pid: int) -> list[int]:
    out = []
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[1]) == pid and fields[0] != "Z":
            out.append(int(stat.parent.name))
    return out


def _alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


def _start_sweep(tmp_path, workers=2, points=2000):
    """A sweep long enough (minutes) that it is still running when the test signals it: a short one
    can finish first, and a signal during interpreter exit kills the process silently (exit -2)."""
    problem = make_study(tmp_path)
    args = [sys.executable, "-m", "selector", "sweep", str(problem), "--vary", f"vehicle.mass_kg=1800:2600:{points}",
            "--workers", str(workers)]
    proc = subprocess.Popen(args, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT,
                            start_new_session=True)
    kids: list[int] = []
    for _ in range(600):  # wait (at most a minute) until the worker processes run
        kids = _children(proc.pid)
        if len(kids) >= workers or proc.poll() is not None:
            break
        time.sleep(0.1)
    assert proc.poll() is None and kids, "the sweep did not start its workers"
    time.sleep(1.0)
    return proc, kids


pytestmark = pytest.mark.skipif(not Path("/proc/self/stat").exists() or (os.cpu_count() or 1) < 2,
                                reason="needs Linux /proc and two CPU cores for worker processes")


@pytest.mark.parametrize("sig, code, words", [(signal.SIGTERM, 143, "terminated"), (signal.SIGINT, 130, "interrupted")])
def test_signal_stops_sweep_and_its_workers(tmp_path, sig, code, words):
    proc, kids = _start_sweep(tmp_path)
    if sig == signal.SIGINT:
        os.killpg(proc.pid, sig)  # Ctrl-C at a terminal reaches the whole process group
    else:
        os.kill(proc.pid, sig)  # a service manager signals the main process only
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == code, err
    assert err.strip().splitlines()[-1].startswith(words) and "Traceback" not in err
    for _ in range(100):
        if not any(_alive(k) for k in kids):
            break
        time.sleep(0.1)
    assert not any(_alive(k) for k in kids), "worker processes left running"


def test_lost_worker_is_reported_cleanly(tmp_path):
    proc, kids = _start_sweep(tmp_path)
    os.kill(kids[0], signal.SIGKILL)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 2, err
    assert "a sweep worker process stopped unexpectedly" in err and "Traceback" not in err


def test_interrupted_write_leaves_no_temporary_file(tmp_path):
    target = tmp_path / "out.csv"

    def write(tmp):
        Path(tmp).write_text("half", encoding="utf-8")
        raise Terminated()

    with pytest.raises(Terminated):
        atomic_write(target, write)
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("extra, words", [
    (["--vary", "vehicle.mass_kg=1000:3000:6000"], "add --large to run it anyway"),
    (["--vary", "vehicle.mass_kg=1000:3000:2", "--workers", "10000"], "--workers 10000: more than the"),
    (["--vary", "vehicle.mass_kg=1000:3000:2", "--scheduler", "notanaddress"], "--scheduler notanaddress: cannot"),
])
def test_sweep_resource_guards(tmp_path, extra, words):
    problem = make_study(tmp_path)
    proc = run_cli("sweep", problem, *extra)
    assert_clean_answer(proc, codes=(2,))
    assert words in proc.stderr


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="needs /dev/full")
def test_full_disk_is_one_line_not_a_traceback():
    with open("/dev/full", "w") as full:
        proc = subprocess.run([sys.executable, "-m", "selector", "check", str(ROOT / "problems" / "parcel_van.toml")],
                              stdout=full, stderr=subprocess.PIPE, text=True, cwd=ROOT, timeout=120)
    assert proc.returncode == 2 and "Traceback" not in proc.stderr
    assert "No space left on device" in proc.stderr
