"""Whole-build benchmarks on synthetic studies made by the example generator.

Prints tables; asserts nothing. Figures (see README, "Performance"):
- a full build of N participants (both editions, HTML + PDF) with --jobs J: booklets per minute,
  and the ratio of total build time to the sum of raw WeasyPrint render times of the same HTML
  (measured in the same run, in one warm process);
- a rebuild after changing one participant's data, as a share of the full build time;
- peak memory (RSS) of metrics-only runs at two study sizes, to show it stays flat.

Usage: python benchmarks/bench_build.py [--participants 200] [--jobs 2] [--large 2000]
"""

from __future__ import annotations

import argparse
import json
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
GENERATOR = REPO / "example_project" / "generate.py"


def generate(n: int, folder: Path) -> Path:
    """Make a synthetic study of n participants with the example generator."""
    subprocess.run(
        [sys.executable, str(GENERATOR), "--participants", str(n), "--out", str(folder)],
        check=True, capture_output=True,
    )
    return folder


def timed_build(project: Path, jobs: int, force: bool = False) -> tuple[float, int]:
    """Build in a fresh process; return (seconds, booklet files written)."""
    t0 = time.perf_counter()
    args = [sys.executable, "-m", "springback.cli", "build", str(project), "-q", "-j", str(jobs)]
    if force:
        args.append("--force")
    subprocess.run(args, check=True, capture_output=True)
    seconds = time.perf_counter() - t0
    n = len(list((project / "out" / "booklets").rglob("*.pdf")))
    return seconds, n


RAW_RENDER = """
import sys, time
from pathlib import Path
from springback.render import html_to_pdf
files = sorted(Path(sys.argv[1]).rglob("*.html"))
html_to_pdf(files[0].read_text(encoding="utf-8"), base_url=Path(sys.argv[2]))  # warm up
t = 0.0
for f in files:
    text = f.read_text(encoding="utf-8")
    t0 = time.perf_counter()
    html_to_pdf(text, base_url=Path(sys.argv[2]))
    t += time.perf_counter() - t0
print(t)
"""


def raw_render_seconds(project: Path) -> float:
    """Sum of WeasyPrint render times of every booklet HTML of a build, one warm process."""
    res = subprocess.run(
        [sys.executable, "-c", RAW_RENDER, str(project / "out" / "booklets"), str(project)],
        check=True, capture_output=True, text=True,
    )
    return float(res.stdout.strip().splitlines()[-1])


METRICS_ONLY = """
import json, resource, sys
from pathlib import Path
from springback import intake, metrics
study = intake.load_study(Path(sys.argv[1]))
for pid in study.participants():
    data = study.slice(pid)
    if data.consent == "yes":
        metrics.compute(data, study.settings)
print(json.dumps({"rss_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
"""


def metrics_peak_rss(project: Path) -> float:
    """Peak RSS (MiB) of a process that loads the study and computes every participant."""
    res = subprocess.run([sys.executable, "-c", METRICS_ONLY, str(project)],
                         check=True, capture_output=True, text=True)
    return json.loads(res.stdout.strip().splitlines()[-1])["rss_mib"]


def touch_one_participant(project: Path) -> None:
    """Change one rating of the first participant (a weekly data update, in miniature)."""
    path = project / "data" / "momentary.csv"
    lines = path.read_text(encoding="utf-8").splitlines()
    row = lines[1].split(",")
    # the last column is an item rating on a 1-7 scale: move it by one step within range
    value = int(float(row[-1]))
    row[-1] = str(value + 1 if value < 7 else value - 1)
    lines[1] = ",".join(row)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--participants", type=int, default=200)
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--large", type=int, default=2000)
    args = parser.parse_args()
    rows: list[tuple[str, str, str]] = []
    with tempfile.TemporaryDirectory() as tmp:
        study = generate(args.participants, Path(tmp) / "study")
        full, pdfs = timed_build(study, args.jobs, force=True)
        raw = raw_render_seconds(study)
        rows.append((f"full build, {args.participants} participants, {args.jobs} jobs",
                     f"{full:.1f} s", f"{pdfs / (full / 60):.1f} PDF booklets/min"))
        rows.append(("raw WeasyPrint render of the same HTML (sum)", f"{raw:.1f} s",
                     f"total/raw = {full / raw:.2f} (target <= 1.25 with 2 jobs: "
                     f"{full / (raw / args.jobs):.2f} per-core)"))
        touch_one_participant(study)
        again, _ = timed_build(study, args.jobs)
        rows.append(("rebuild after one participant's data changed", f"{again:.1f} s",
                     f"{100 * again / full:.1f}% of the full build (target < 5%)"))
        rss_small = metrics_peak_rss(study)
        shutil.rmtree(study / "out", ignore_errors=True)
        large = generate(args.large, Path(tmp) / "large")
        rss_large = metrics_peak_rss(large)
        rows.append((f"peak RSS, metrics only, {args.participants} participants",
                     f"{rss_small:.0f} MiB", ""))
        rows.append((f"peak RSS, metrics only, {args.large} participants",
                     f"{rss_large:.0f} MiB", f"ratio {rss_large / rss_small:.2f} (flat ~ 1)"))
    width = max(len(r[0]) for r in rows)
    print(f"{'benchmark'.ljust(width)}  {'time/size':>12}  figure")
    for name, value, figure in rows:
        print(f"{name.ljust(width)}  {value:>12}  {figure}")
    print(f"(this machine: {resource.getpagesize()} B pages; python {sys.version.split()[0]})")


if __name__ == "__main__":
    main()
