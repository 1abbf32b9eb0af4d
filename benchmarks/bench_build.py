"""Whole-build benchmarks on synthetic studies made by the example generator.

Prints tables; asserts nothing. Figures (see README, "Performance"):
- a full build of N participants (both editions, HTML + PDF) with --jobs J: booklets per minute,
  and the ratio of total build time to the sum of raw WeasyPrint render times of the same HTML
  per job (measured in the same run, in one warm process), against two baselines: a plain
  WeasyPrint call, and the same call with the build's garbage-collector setting (so the second
  ratio is what the pipeline adds beyond rendering);
- a rebuild after changing one participant's data, as a share of the full build time;
- peak memory (RSS): the largest process of the full build, and metrics-only runs at two study
  sizes, read after every `--every` participants, to show it stays flat. The large study is
  the small one's files repeated under new ids (`--large` participants in all), and the same
  people are computed in both (the small study's first `--computed`, default all of them), so
  the only difference between the two runs is how many other participants the study holds.

Each figure is printed as soon as it is measured, with the 1-minute load average beside it
(the machine may be shared). Usage:
python benchmarks/bench_build.py [--participants 200] [--jobs 2] [--large 2000] [--computed M]
                                  [--only-builds | --only-memory]
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


CLI = "from springback.cli.core import main; main()"


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
import gc, sys, time
from pathlib import Path
from springback.build.jobs import fewer_collections
from springback.render import html_to_pdf
files = sorted(Path(sys.argv[1]).rglob("*.html"))
base = Path(sys.argv[2])
html_to_pdf(files[0].read_text(encoding="utf-8"), base_url=base)  # warm up
sums = {"plain": 0.0, "tuned": 0.0}
for i, f in enumerate(files):
    text = f.read_text(encoding="utf-8")
    for how in (("plain", "tuned") if i % 2 == 0 else ("tuned", "plain")):
        t0 = time.perf_counter()
        if how == "tuned":
            with fewer_collections():
                html_to_pdf(text, base_url=base)
            sums[how] += time.perf_counter() - t0  # includes the setting's closing collection
        else:
            html_to_pdf(text, base_url=base)
            sums[how] += time.perf_counter() - t0
            # Untimed, so the next render (of either kind) is not charged with this one's
            # garbage; it can only make the plain sum smaller, the ratio to it larger.
            gc.collect()
print(sums["plain"], sums["tuned"])
"""


def raw_render_seconds(project: Path) -> tuple[float, float]:
    """Sums of WeasyPrint render times of every booklet HTML of a build, one warm process.

    Plain: `HTML(...).write_pdf(pdf_variant="pdf/ua-1")` as a script would call it. Tuned: the
    same call inside the build's garbage-collector setting (`build.fewer_collections`), which
    is what the build itself does, so total/tuned is what the pipeline adds. Each file is
    rendered both ways one after the other (the order alternating from file to file), so a
    change in the machine's speed during the run affects both sums alike.
    """
    res = subprocess.run(
        [sys.executable, "-c", RAW_RENDER, str(project / "out" / "booklets"), str(project)],
        check=True, capture_output=True, text=True,
    )
    plain, tuned = res.stdout.strip().splitlines()[-1].split()
    return float(plain), float(tuned)


METRICS_ONLY = """
import json, resource, sys, time
from pathlib import Path
from springback import intake, metrics
wanted, every = json.loads(Path(sys.argv[2]).read_text()), int(sys.argv[3])
def rss():
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
t0 = time.perf_counter()
study = intake.load_study(Path(sys.argv[1]))
points = [(0, rss())]
loaded = time.perf_counter() - t0
for i, pid in enumerate(wanted, start=1):
    data = study.slice(pid)
    if data.consent == "yes":
        metrics.compute(data, study.settings)
    if i % every == 0 or i == len(wanted):
        points.append((i, rss()))
print(json.dumps({"points": points, "load_s": loaded, "n": len(study.participants()),
                  "s": time.perf_counter() - t0}))
"""


def metrics_peak_rss(project: Path, participants: list[str], every: int = 50) -> dict:
    """Peak RSS (MiB) after loading the study and after every `every` participants computed."""
    wanted = project / "computed.json"
    wanted.write_text(json.dumps(participants), encoding="utf-8")
    res = subprocess.run([sys.executable, "-c", METRICS_ONLY, str(project), str(wanted),
                          str(every)], check=True, capture_output=True, text=True)
    return json.loads(res.stdout.strip().splitlines()[-1])


def roster_ids(project: Path) -> list[str]:
    lines = (project / "data" / "participants.csv").read_text(encoding="utf-8").splitlines()
    return sorted(line.split(",")[0] for line in lines[1:] if line)


def copies(project: Path, n: int, folder: Path) -> Path:
    """The study's files repeated under new ids (P001, P001-c1, ...) until n participants."""
    shutil.copytree(project, folder, ignore=shutil.ignore_patterns("out", "archive", ".*"))
    ids = roster_ids(project)
    per = len(ids)
    for path in sorted((project / "data").glob("*.csv")):
        lines = path.read_text(encoding="utf-8").splitlines()
        head, body = lines[0], [line for line in lines[1:] if line]
        out = [head, *body]
        for k in range(1, -(-n // per)):
            keep = body if (k + 1) * per <= n else [
                line for line in body if line.split(",")[0] in ids[: n - k * per]]
            out += [f"{line.split(',', 1)[0]}-c{k},{line.split(',', 1)[1]}" for line in keep]
        (folder / "data" / path.name).write_text("\n".join(out) + "\n", encoding="utf-8")
    return folder


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
    parser.add_argument("--computed", type=int, default=0,
                        help="participants computed in each memory run (0: all of the small "
                        "study)")
    parser.add_argument("--every", type=int, default=50)
    parser.add_argument("--only-builds", action="store_true",
                        help="skip the raw render sum and the memory runs (a quicker pass)")
    parser.add_argument("--only-memory", action="store_true",
                        help="only the metrics-only memory runs")
    parser.add_argument("--no-memory", action="store_true", help="skip the memory runs")
    args = parser.parse_args()
    print(f"python {sys.version.split()[0]}, {os.cpu_count()} cores; "
          f"{time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}", flush=True)
    with tempfile.TemporaryDirectory() as tmp:
        study = generate(args.participants, Path(tmp) / "study")
        if not args.only_memory:
            builds(study, args)
        if not args.only_builds and not args.no_memory:
            memory(study, Path(tmp) / "large", args)


def builds(study: Path, args: argparse.Namespace) -> None:
    """Full build, raw render sums, and the two rebuilds."""
    full, pdfs, _ = timed_build(study, args.jobs, force=True)
    show(f"full build, {args.participants} participants, {args.jobs} jobs", f"{full:.1f} s",
         f"{pdfs} PDF booklets (+ as many HTML): {pdfs / (full / 60):.1f} PDF booklets/min")
    show("peak RSS of the largest build process", f"{children_peak_rss():.0f} MiB",
         "target < 1024 MiB")
    if not args.only_builds:
        sums = raw_render_seconds(study)
        for raw, label in zip(sums, ("plain", "with the build's GC setting"), strict=True):
            show(f"raw WeasyPrint render of the same HTML, {label}", f"{raw:.1f} s",
                 f"sum, 1 process; total/(raw/{args.jobs} jobs) = "
                 f"{full / (raw / args.jobs):.2f}" + (" (target <= 1.25)" if raw is sums[0]
                                                     else ""))
    again, _, reused = timed_build(study, args.jobs)
    show("rebuild with nothing changed", f"{again:.1f} s",
         f"{100 * again / full:.1f}% of the full build; {reused} reused")
    touch_one_participant(study)
    again, _, reused = timed_build(study, args.jobs)
    show("rebuild after one participant's data changed", f"{again:.1f} s",
         f"{100 * again / full:.1f}% of the full build (target < 5%); {reused} reused")


def memory(study: Path, large_folder: Path, args: argparse.Namespace) -> None:
    """Metrics only, the same participants computed in a small and in a large study."""
    people = roster_ids(study)[: args.computed or None]
    small = metrics_peak_rss(study, people, every=args.every)
    show(f"peak RSS, metrics only, {small['n']} participants, {len(people)} computed",
         f"{small['points'][-1][1]:.0f} MiB", f"after loading {small['points'][0][1]:.0f} MiB; "
         f"loading took {small['load_s']:.1f} s")
    large = copies(study, args.large, large_folder)
    big = metrics_peak_rss(large, people, every=args.every)
    show(f"peak RSS, metrics only, {big['n']} participants, the same {len(people)} computed",
         f"{big['points'][-1][1]:.0f} MiB",
         f"ratio to {small['n']}: {big['points'][-1][1] / small['points'][-1][1]:.2f}; "
         f"after loading {big['points'][0][1]:.0f} MiB; loading took {big['load_s']:.1f} s")
    for name, run in ((small["n"], small), (big["n"], big)):
        print(f"RSS (MiB) after n participants computed, study of {name}: "
              + ", ".join(f"{n}: {r:.0f}" for n, r in run["points"]), flush=True)


if __name__ == "__main__":
    main()
