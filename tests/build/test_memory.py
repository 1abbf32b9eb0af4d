"""Handing free heap pages back to the system after a large temporary working set."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

from springback.memory import _trim, release_free_memory


def _resident_mib() -> float:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1]) / 1024
    raise AssertionError("no VmRSS line")


@pytest.mark.skipif(not sys.platform.startswith("linux") or _trim() is None,
                    reason="needs glibc's malloc_trim")
def test_free_pages_between_live_blocks_go_back_to_the_system() -> None:
    """Check that after freeing most of many small heap blocks (every 64th kept, so the heap
    cannot shrink from its top), releasing lowers the resident size by most of what was freed
    (glibc's malloc_trim gives back whole free pages inside the heap since glibc 2.8, per
    its manual page, from memory)."""
    blocks = [np.ones(512) for _ in range(120_000)]  # 4 KiB each, from the C heap: ~470 MiB
    kept = blocks[::64]
    del blocks
    before = _resident_mib()
    release_free_memory()
    after = _resident_mib()
    assert len(kept) == 1875
    assert before - after > 200, (before, after)
