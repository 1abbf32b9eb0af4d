"""The example study's build (both editions, HTML + PDF) now against an earlier commit, in one run.

    python benchmarks/bench_editions.py [--base COMMIT] [--rounds N] [--jobs J]

The earlier commit is checked out into a temporary git worktree and run with the same
interpreter and libraries (its `src/` first on the path); the two builds alternate round by
round so that a change in the machine's speed affects both alike. The raw WeasyPrint floor is
the sum of plain `write_pdf` times of a build's HTML files, divided by the jobs; it is
measured for both builds (each against its own booklets).
Prints a table; asserts nothing.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench_build import raw_render_seconds

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_BASE = "44b081a"
"""The last commit before the booklets were reshaped (summary first, appendix, findings)."""


def build_once(src: Path, example: Path, jobs: int, work: Path) -> tuple[float, Path]:
    """Copy the example, build it with the springback at `src`, return wall seconds."""
    project = work / f"p{time.monotonic_ns()}"
    shutil.copytree(example, project)
    env = dict(os.environ, PYTHONPATH=str(src), SOURCE_DATE_EPOCH="1700000000",
               NO_COLOR="1")
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-m", "springback", "build", str(project), "--jobs",
                    str(jobs)], check=True, env=env, capture_output=True)
    return time.perf_counter() - t0, project


def pages(project: Path) -> int:
    from pypdf import PdfReader

    return sum(len(PdfReader(p).pages) for p in (project / "out" / "booklets").glob("*/*.pdf"))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--base", default=DEFAULT_BASE)
    ap.add_argument("--rounds", type=int, default=2)
    ap.add_argument("--jobs", type=int, default=2)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory(prefix="sb-editions-") as tmp:
        work = Path(tmp)
        base = work / "base"
        subprocess.run(["git", "-C", str(ROOT), "worktree", "add", "--detach", "-q", str(base),
                        args.base], check=True)
        try:
            times: dict[str, list[float]] = {"base": [], "now": []}
            last: dict[str, Path] = {}
            for r in range(args.rounds):
                order = ("base", "now") if r % 2 == 0 else ("now", "base")
                for name in order:
                    src = (base if name == "base" else ROOT) / "src"
                    secs, project = build_once(src, ROOT / "example_project", args.jobs, work)
                    times[name].append(secs)
                    last[name] = project
            raw_plain, _ = raw_render_seconds(last["now"])
            raw_base, _ = raw_render_seconds(last["base"])
            load = os.getloadavg()[0]
        finally:
            subprocess.run(["git", "-C", str(ROOT), "worktree", "remove", "--force",
                            str(base)], check=False)
        b, n = statistics.median(times["base"]), statistics.median(times["now"])
        floor = raw_plain / args.jobs
        print(f"example build, {args.jobs} jobs, median of {args.rounds} (1-minute load "
              f"{load:.1f})")
        print("| build | seconds | PDF pages |\n|---|---|---|")
        print(f"| {args.base} (before) | {b:.1f} | {pages(last['base'])} |")
        print(f"| now | {n:.1f} | {pages(last['now'])} |")
        print(f"speed-up before/now: {b / n:.2f}x; now / raw WeasyPrint floor "
              f"({raw_plain:.1f} s / {args.jobs} jobs): {n / floor:.2f}; before / its own "
              f"floor ({raw_base:.1f} s / {args.jobs} jobs): {b / (raw_base / args.jobs):.2f}")


if __name__ == "__main__":
    main()
