"""Where one participant's build time goes, and what the worker warm-up saves.

Prints tables; asserts nothing. In one fresh process: the cold first chart and first PDF, the
warm-up (`springback.build.warm_engines`), then for a few participants of the example study
each stage (metrics, safety, charts, HTML and PDF per edition), counting how often the charts
are made (once per participant, shared by both editions); one participant as the first job of
a new spawn worker with and without the warm-up initializer. Finally the PDF time of one booklet
as built and with its embedded fonts (data URLs) removed, to show what the fonts cost.

Usage: python benchmarks/bench_stages.py [--participants P01 P03 ...] [--project DIR]
"""

from __future__ import annotations

import argparse
import re
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

REPO = Path(__file__).resolve().parents[1]
FONT_URL = re.compile(r"url\(\s*['\"]?data:(font|application)/[^)]*\)")


def timed(fn: Callable[[], Any]) -> tuple[float, Any]:
    """(seconds, result) of one call."""
    t0 = time.perf_counter()
    value = fn()
    return time.perf_counter() - t0, value


def cold_engines() -> list[tuple[str, float]]:
    """The first chart and the first PDF in a fresh process, then the same again (warm)."""
    from springback.build.jobs import WARM_CHART
    from springback.charts.svg import to_svg
    from springback.render import html_to_pdf

    page = ("<!doctype html><html lang='en'><head><meta charset='utf-8'><title>t</title></head>"
            "<body><p>t</p></body></html>")
    rows = []
    for label in ("first (cold)", "second (warm)"):
        rows.append((f"chart engine, {label}",
                     timed(lambda: to_svg(WARM_CHART, "k", "t", "d", "en"))[0]))
        rows.append((f"PDF engine, {label}",
                     timed(lambda: html_to_pdf(page, base_url=REPO))[0]))
    return rows


def stages(project: Path, participants: list[str]) -> list[tuple[str, float]]:
    """Seconds per stage for each participant, with the number of chart sets made."""
    from springback import __version__, charts, intake, metrics, render
    from springback.build.records import EDITIONS
    from springback.i18n.language import translations
    from springback.safety import rules as safety
    from springback.safety.rules import study_end

    study = intake.load_study(project)
    end = study_end(study)
    rows: list[tuple[str, float]] = []
    made = {"n": 0}
    original = charts.make_charts

    def counting(*args: Any, **kwargs: Any) -> Any:
        made["n"] += 1
        return original(*args, **kwargs)

    charts.make_charts = counting  # type: ignore[assignment]
    try:
        for pid in participants:
            data = study.slice(pid)
            t, results = timed(lambda data=data: metrics.compute(data, study.settings))
            rows.append((f"{pid} metrics", t))
            t, flags = timed(lambda data=data, results=results: safety.evaluate(
                data, results, study.settings, period_end=end))
            rows.append((f"{pid} safety", t))
            lang = data.language
            env = render.make_environment(project / "templates", lang)
            t, chart_set = timed(lambda data=data, results=results, lang=lang: charts.make_charts(
                data, results, study.settings, lang, translations(lang).gettext))
            rows.append((f"{pid} charts ({len(chart_set)}), once for both editions", t))
            for edition in EDITIONS if data.therapist else EDITIONS[:1]:
                def html(edition: str = edition, data: Any = data, results: Any = results,
                         flags: Any = flags, chart_set: Any = chart_set, env: Any = env) -> str:
                    context = render.build_context(
                        settings=study.settings, data=data, results=results, flags=flags,
                        review_state="not needed", charts=chart_set, edition=edition,
                        language=data.language, version=1, built_at=study_end(study),
                        tool_version=__version__)
                    return render.render_edition(env, context, edition)
                t, text = timed(html)
                rows.append((f"{pid} {edition} HTML ({len(text) // 1024} KiB)", t))
                t, pdf = timed(lambda text=text: render.html_to_pdf(text, base_url=project))
                rows.append((f"{pid} {edition} PDF ({len(pdf) // 1024} KiB)", t))
    finally:
        charts.make_charts = original  # type: ignore[assignment]
    rows.append(("chart sets made for these participants", float(made["n"])))
    return rows


def _noop() -> None:
    return None


def first_job_in_a_new_worker(project: Path, participant: str) -> list[tuple[str, float]]:
    """The first participant's time in a fresh spawn worker, without and with the warm-up."""
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    from springback import intake
    from springback.build.jobs import run_job, warm_engines
    from springback.build.records import Job
    from springback.safety.rules import study_end

    study = intake.load_study(project)
    end = study_end(study)
    job = Job(project, study.slice(participant), study.settings, "bench", 1, end, end)
    rows = []
    for label, init in (("no warm-up", None), ("warm_engines as initializer", warm_engines)):
        with ProcessPoolExecutor(1, mp_context=multiprocessing.get_context("spawn"),
                                 initializer=init) as pool:
            pool.submit(_noop).result()  # the worker is up (and warmed, if asked)
            t, outcome = timed(lambda pool=pool: pool.submit(run_job, job).result())
        rows.append((f"{participant} as a new worker's first job, {label} "
                     f"({outcome.status})", t))
    return rows


def font_cost(project: Path, participant: str) -> list[tuple[str, float]]:
    """PDF seconds of one booklet as built and without its embedded fonts."""
    from springback.render import html_to_pdf

    path = project / "out" / "booklets" / participant / "participant.html"
    if not path.is_file():
        return []
    text = path.read_text(encoding="utf-8")
    bare = FONT_URL.sub("local('sans-serif')", text)
    html_to_pdf(text, base_url=project)  # warm
    return [
        (f"fonts embedded as data URLs: {(len(text) - len(bare)) // 1024} KiB of "
         f"{len(text) // 1024} KiB HTML", 0.0),
        ("PDF of the built HTML", timed(lambda: html_to_pdf(text, base_url=project))[0]),
        ("PDF of the same HTML without embedded fonts",
         timed(lambda: html_to_pdf(bare, base_url=project))[0]),
    ]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--project", type=Path, default=REPO / "example_project")
    parser.add_argument("--participants", nargs="+", default=["P01", "P03"])
    args = parser.parse_args()
    t0 = time.perf_counter()
    rows = cold_engines()
    from springback.build.jobs import warm_engines

    rows.append(("warm_engines() in a process that already ran both", timed(warm_engines)[0]))
    rows += stages(args.project, args.participants)
    rows += first_job_in_a_new_worker(args.project, args.participants[-1])
    rows += font_cost(args.project, args.participants[0])
    width = max(len(r[0]) for r in rows)
    print(f"{'stage'.ljust(width)}  seconds")
    for name, value in rows:
        print(f"{name.ljust(width)}  {value:7.3f}")
    print(f"total {time.perf_counter() - t0:.1f} s")


if __name__ == "__main__":
    main()
