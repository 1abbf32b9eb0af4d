"""Pool workers end with their parent: a killed build leaves no process behind."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

SCRIPT = """
import time
from springback.build.runner import run_jobs
run_jobs([120, 120], time.sleep, jobs_n=2)
"""


def _children(pid: int) -> list[int]:
    out = []
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[1]) == pid:
            out.append(int(stat.parent.name))
    return out


def _alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"  # a zombie has ended; only its exit status waits to be collected


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def test_killed_parent_takes_its_workers_along() -> None:
    """Check SIGKILL of a pool's parent ends both spawn workers and the resource tracker."""
    parent = subprocess.Popen([sys.executable, "-c", SCRIPT])
    try:
        deadline = time.monotonic() + 60
        while len(_children(parent.pid)) < 3 and time.monotonic() < deadline:
            time.sleep(0.2)  # two workers and the resource tracker
        time.sleep(1.0)  # let the workers finish their start-up
        children = _children(parent.pid)
        assert len(children) >= 3, children
    finally:
        os.kill(parent.pid, signal.SIGKILL)
        parent.wait()
    deadline = time.monotonic() + 15
    while any(_alive(c) for c in children) and time.monotonic() < deadline:
        time.sleep(0.2)
    left = [c for c in children if _alive(c)]
    for c in left:
        os.kill(c, signal.SIGKILL)
    assert left == []
