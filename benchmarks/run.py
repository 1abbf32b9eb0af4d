"""Run every benchmark (`make bench`) and print their tables. Nothing here is asserted."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent

for script in ("bench_metrics.py", "bench_stages.py", "bench_build.py", "bench_editions.py"):
    print(f"\n== {script} ==", flush=True)
    subprocess.run([sys.executable, str(HERE / script)], check=False)
