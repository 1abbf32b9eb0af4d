"""Whole-build benchmarks on synthetic studies made by the example generator.

Prints tables; asserts nothing. Figures (see README, "Performance"):
- a full build of N participants (both editions, HTML + PDF) with --jobs J: booklets per minute,
  and the ratio of total build time to the sum of raw WeasyPrint render times of the same HTML
  per job (measured in the same run, in one warm process), against two baselines: a plain
  WeasyPrint call, and the same call with the build's garbage-collector setting (so the second
  ratio is what the pipeline adds beyond rendering);
- a rebuild after changing one participant's data, as a share of the full build time;
- peak memory (RSS): the largest process of the full build, and metrics-only runs at two study
  sizes, read after every `--every` participants, to show it stays flat. `--large-limit M`
  computes only the first M participants of the large study (its data are still all loaded).

Each figure is printed as soon as it is measured, with the 1-minute load average beside it
(the machine may be shared). Usage:
python benchmarks/bench_build.py [--participants 200] [--jobs 2] [--large 2000] [--large-limit M]
"""

from __future__ import annotations

import argparse
import json
import os
import re
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


CLI = "from springback.cli import main; main()"


def timed_build(project: Path, jobs: int, force: bool = False) -> tuple[float, int, int]:
    """Build in a fresh process; return (seconds, PDF booklets, participants reused)."""
    t0 = time.perf_counter()
    args = [sys.executable, "-c", CLI, "build", str(project), "-q", "-j", str(jobs)]
    if force:
        args.append("--force")
    res = subprocess.run(args, capture_output=True, text=True)
    if res.returncode not in (0, 2):  # 2: some participant failed; the summary says which
        sys.exit(f"the build failed:\n{res.stderr[-3000:]}")
    seconds = time.perf_counter() - t0
    n = len(list((project / "out" / "booklets").rglob("*.pdf")))
    reused = re.search(r"unchanged since the last build\W+(\d+)", res.stdout)
    return seconds, n, int(reused.group(1)) if reused else 0


RAW_RENDER = """
import contextlib, sys, time
from pathlib import Path
from springback.build import fewer_collections
from springback.render import html_to_pdf
files = sorted(Path(sys.argv[1]).rglob("*.html"))
tuned = sys.argv[3] == "tuned"
html_to_pdf(files[0].read_text(encoding="utf-8"), base_url=Path(sys.argv[2]))  # warm up
t = 0.0
for f in files:
    text = f.read_text(encoding="utf-8")
    t0 = time.perf_counter()
    with fewer_collections() if tuned else contextlib.nullcontext():
        html_to_pdf(text, base_url=Path(sys.argv[2]))
    t += time.perf_counter() - t0
print(t)
"""


def raw_render_seconds(project: Path, tuned: bool = False) -> float:
    """Sum of WeasyPrint render times of every booklet HTML of a build, one warm process.

    Plain: `HTML(...).write_pdf(pdf_variant="pdf/ua-1")` as a script would call it. Tuned: the
    same call inside the build's garbage-collector setting (`build.fewer_collections`), which
    is what the build itself does, so total/tuned is the pipeline's own overhead.
    """
    res = subprocess.run(
        [sys.executable, "-c", RAW_RENDER, str(project / "out" / "booklets"), str(project),
         "tuned" if tuned else "plain"],
        check=True, capture_output=True, text=True,
    )
    return float(res.stdout.strip().splitlines()[-1])


METRICS_ONLY = """
import json, resource, sys, time
from pathlib import Path
from springback import intake, metrics
limit, every = int(sys.argv[2]), int(sys.argv[3])
def rss():
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
t0 = time.perf_counter()
study = intake.load_study(Path(sys.argv[1]))
points = [(0, rss())]
loaded = time.perf_counter() - t0
people = study.participants()[:limit] if limit else study.participants()
for i, pid in enumerate(people, start=1):
    data = study.slice(pid)
    if data.consent == "yes":
        metrics.compute(data, study.settings)
    if i % every == 0 or i == len(people):
        points.append((i, rss()))
print(json.dumps({"points": points, "load_s": loaded, "n": len(study.participants()),
                  "s": time.perf_counter() - t0}))
"""


def metrics_peak_rss(project: Path, limit: int = 0, every: int = 50) -> dict:
    """Peak RSS (MiB) after loading the study and after every `every` participants computed."""
    res = subprocess.run([sys.executable, "-c", METRICS_ONLY, str(project), str(limit),
                          str(every)], check=True, capture_output=True, text=True)
    return json.loads(res.stdout.strip().splitlines()[-1])


def touch_one_participant(project: Path) -> None:
    """Change one rating of the first participant (a weekly data update, in miniature)."""
    path = project / "data" / "momentary.csv"
    lines = path.read_text(encoding="utf-8").splitlines()
    col = lines[0].split(",").index("down")  # an item rated 1-7: move it one step within range
    for i, line in enumerate(lines[1:], start=1):
        row = line.split(",")
        if row[col]:
            value = int(float(row[col]))
            row[col] = str(value + 1 if value < 7 else value - 1)
            lines[i] = ",".join(row)
            break
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def children_peak_rss() -> float:
    """Peak RSS (MiB) of the largest finished child process so far (builds and their workers)."""
    return resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024


def show(name: str, value: str, figure: str = "") -> None:
    """Print one measured row at once, with the 1-minute load average."""
    print(f"{name:<58} {value:>10}  load {os.getloadavg()[0]:4.1f}  {figure}", flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--participants", type=int, default=200)
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--large", type=int, default=2000)
    parser.add_argument("--large-limit", type=int, default=0,
                        help="compute only this many participants of the large study (0: all)")
    parser.add_argument("--every", type=int, default=50)
    parser.add_argument("--only-builds", action="store_true",
                        help="skip the raw render sum and the memory runs (a quicker pass)")
    args = parser.parse_args()
    print(f"python {sys.version.split()[0]}, {os.cpu_count()} cores; "
          f"{time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}", flush=True)
    with tempfile.TemporaryDirectory() as tmp:
        study = generate(args.participants, Path(tmp) / "study")
        full, pdfs, _ = timed_build(study, args.jobs, force=True)
        show(f"full build, {args.participants} participants, {args.jobs} jobs", f"{full:.1f} s",
             f"{pdfs} PDF booklets (+ as many HTML): {pdfs / (full / 60):.1f} PDF booklets/min")
        show("peak RSS of the largest build process", f"{children_peak_rss():.0f} MiB",
             "target < 1024 MiB")
        if not args.only_builds:
            for tuned, label in ((False, "plain"), (True, "with the build's GC setting")):
                raw = raw_render_seconds(study, tuned=tuned)
                show(f"raw WeasyPrint render of the same HTML, {label}", f"{raw:.1f} s",
                     f"sum, 1 process; total/(raw/{args.jobs} jobs) = "
                     f"{full / (raw / args.jobs):.2f}" + ("" if tuned else " (target <= 1.25)"))
        again, _, reused = timed_build(study, args.jobs)
        show("rebuild with nothing changed", f"{again:.1f} s",
             f"{100 * again / full:.1f}% of the full build; {reused} reused")
        touch_one_participant(study)
        again, _, reused = timed_build(study, args.jobs)
        show("rebuild after one participant's data changed", f"{again:.1f} s",
             f"{100 * again / full:.1f}% of the full build (target < 5%); {reused} reused")
        if args.only_builds:
            return
        small = metrics_peak_rss(study, every=args.every)
        shutil.rmtree(study, ignore_errors=True)
        show(f"peak RSS, metrics only, {args.participants} participants",
             f"{small['points'][-1][1]:.0f} MiB", f"after loading {small['points'][0][1]:.0f} MiB")
        large = generate(args.large, Path(tmp) / "large")
        big = metrics_peak_rss(large, limit=args.large_limit, every=args.every)
        done = big["points"][-1][0]
        show(f"peak RSS, metrics only, {args.large} participants loaded, {done} computed",
             f"{big['points'][-1][1]:.0f} MiB",
             f"ratio to {args.participants}: {big['points'][-1][1] / small['points'][-1][1]:.2f}"
             f"; loading took {big['load_s']:.0f} s, all {big['s']:.0f} s")
        print("RSS (MiB) after n participants of the large study: "
              + ", ".join(f"{n}: {r:.0f}" for n, r in big["points"]), flush=True)


if __name__ == "__main__":
    main()
