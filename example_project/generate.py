"""Generate the data of the fictional example study "Tidewater Mood Diary" (seeded, byte-identical).

    python example_project/generate.py [--participants N] [--out DIR] [--seed S]

Without options it rewrites example_project/data/*.csv, example_project/truth.csv and the
known-truth table in example_project/README.md. With --participants N it makes a larger study of
the same shape (the twelve example roles first, then a random mix of the same dynamics) in
--out DIR, with a copy of the example's study.toml, for the benchmarks. Every participant's
latent low mood (1-7, higher = worse) follows a process of springback.simulate with known
parameters, written to truth.csv; items are that mood plus item noise, rounded and clipped.
"""

from __future__ import annotations

import argparse
import re
import sys
from pathlib import Path

import numpy as np
import pandas as pd

from springback import simulate as sim

HERE = Path(__file__).resolve().parent
SEED = 20260202
START = np.datetime64("2026-02-02")  # a Monday; clocks go forward on Sunday 29 March 2026
DAYS = 112  # 16 weeks
ZONE = "Europe/Amsterdam"
BLOCKS = ((8.0, 10.8), (10.8, 13.6), (13.6, 16.4), (16.4, 19.2), (19.2, 22.0))
MARGIN_HOURS = 0.25  # prompts at least 15 minutes apart
NEGATIVE = {"down": 0.0, "anxious": -0.3, "irritated": -0.5, "tense": 0.2}  # item offsets
POSITIVE = {"cheerful": 0.0, "relaxed": -0.2, "content": 0.1}
ITEM_NOISE = 0.6
UPSETTING = ("conflict", "bad news", "setback", "worry")
PLEASANT = ("good news", "time with friends")
PHQ_SLOPE, PHQ_AT_ZERO, PHQ_NOISE = 4.5, 1.5, 1.5  # phq9 = 4.5 * (mean low mood - 1.5) + noise
MARK_START, MARK_END = "<!-- known-truth:start -->", "<!-- known-truth:end -->"

# The twelve example roles. Unlisted fields take BASE. Days count from 0 (2 February 2026).
BASE = dict(
    consent="yes", feedback="yes", therapist="no", mean_start=3.0, mean_end=np.nan,
    trend_from_day=0.0, trend_to_day=0.0, rate_start=0.4, rate_end=np.nan, slowing_from_day=0.0,
    shift_day=np.nan, shift_size=0.0, rate_after_shift=np.nan, sd=0.7, well_low=np.nan,
    well_high=np.nan, barrier=np.nan, noise=np.nan, upsetting_per_week=0.6, kick_per_intensity=0.45,
    compliance=0.8, last_day=DAYS - 1, expected="",
)
CAST = [
    dict(dynamics="stable", language="en", region="north", therapist="yes", mean_start=2.6,
         rate_start=0.45, sd=0.65, compliance=0.82),
    dict(dynamics="stable", language="nl", region="south", mean_start=3.1, rate_start=0.3,
         sd=0.8, compliance=0.76),
    dict(dynamics="stable", language="de", region="north", mean_start=2.4, rate_start=0.6,
         sd=0.6, compliance=0.84),
    dict(dynamics="stable", language="en", region="south", mean_start=3.4, rate_start=0.35,
         sd=0.75, compliance=0.78),
    dict(dynamics="slowing then shift", language="nl", region="north", therapist="yes",
         mean_start=3.0, rate_start=0.5, rate_end=0.08, slowing_from_day=28.0, shift_day=77.0,
         shift_size=2.0, rate_after_shift=0.35, sd=0.55, compliance=0.8,
         expected="refer (shift)"),
    dict(dynamics="two states", language="de", region="south", therapist="yes", well_low=2.4,
         well_high=5.0, barrier=0.1056, noise=0.354, compliance=0.78),
    dict(dynamics="event recovery", language="en", region="north", mean_start=2.8,
         rate_start=float(sim.rate_for_half_life(3.0)), sd=0.5, upsetting_per_week=4.0,
         kick_per_intensity=0.55, compliance=0.83),
    dict(dynamics="gradual worsening", language="de", region="north", therapist="yes",
         mean_start=3.0, mean_end=6.4, trend_from_day=50.0, trend_to_day=98.0, rate_start=0.3,
         sd=0.6, compliance=0.79, expected="hold (phq9)"),
    dict(dynamics="too little data", language="nl", region="south", mean_start=3.2,
         compliance=0.8, last_day=4, expected="not enough data; refer (silence)"),
    dict(dynamics="stable", language="de", region="south", consent="withdrawn", mean_start=2.9,
         rate_start=0.4, expected="withdrawn: no booklet"),
    dict(dynamics="stable", language="nl", region="north", feedback="no", mean_start=2.7,
         rate_start=0.5, sd=0.7, compliance=0.74, expected="no booklet wanted"),
    dict(dynamics="gradual improvement", language="en", region="south", therapist="yes",
         mean_start=4.3, mean_end=2.6, trend_from_day=0.0, trend_to_day=100.0, rate_start=0.4,
         compliance=0.77, last_day=101, expected="refer (silence)"),
]


def cast_truth(n: int, rng: np.random.Generator) -> pd.DataFrame:
    """Return the known truth per participant: the twelve roles, then a random mix up to n."""
    rows = [BASE | role for role in CAST[:n]]
    kinds = ["stable", "slowing then shift", "two states", "event recovery",
             "gradual worsening", "gradual improvement", "too little data"]
    weights = np.array([0.45, 0.1, 0.1, 0.1, 0.07, 0.13, 0.05])
    for kind in rng.choice(kinds, size=max(n - len(rows), 0), p=weights):
        rows.append(BASE | _random_role(str(kind), rng))
    truth = pd.DataFrame(rows)
    width = max(2, len(str(n)))
    truth.insert(0, "participant", [f"P{i + 1:0{width}d}" for i in range(n)])
    needs_noise = truth["noise"].isna()
    truth.loc[needs_noise, "noise"] = sim.noise_for_sd(
        truth.loc[needs_noise, "rate_start"], truth.loc[needs_noise, "sd"])
    two = truth["dynamics"] == "two states"
    truth.loc[two, "rate_start"] = [sim.well_rate(lo, hi, b) for lo, hi, b in
                                   truth.loc[two, ["well_low", "well_high", "barrier"]].values]
    truth.loc[two, "sd"] = np.nan
    truth.loc[two, "mean_start"] = (truth.loc[two, "well_low"] + truth.loc[two, "well_high"]) / 2
    truth["half_life_hours"] = sim.half_life(truth["rate_start"].to_numpy())
    truth["mean_end"] = truth["mean_end"].fillna(truth["mean_start"])
    truth["rate_end"] = truth["rate_end"].fillna(truth["rate_start"])
    first = ["participant", "dynamics", "language", "region", "consent", "feedback", "therapist"]
    return truth[first + [c for c in truth.columns if c not in first]]


def _random_role(kind: str, rng: np.random.Generator) -> dict:
    """Draw one participant's role and parameters for a large synthetic study."""
    u = rng.uniform
    role = dict(dynamics=kind, language=str(rng.choice(["en", "nl", "de"])),
                region=str(rng.choice(["north", "south"])),
                therapist="yes" if u() < 0.5 else "no", mean_start=u(2.2, 3.6),
                rate_start=u(0.25, 0.7), sd=u(0.5, 0.9), compliance=u(0.7, 0.86))
    if kind == "slowing then shift":
        role |= dict(mean_start=u(2.6, 3.4), rate_start=u(0.4, 0.6), rate_end=u(0.06, 0.12),
                     slowing_from_day=u(20, 40), shift_day=float(rng.integers(70, 91)),
                     shift_size=u(1.6, 2.4), rate_after_shift=u(0.3, 0.5), sd=u(0.45, 0.6),
                     expected="refer (shift)")
    elif kind == "two states":
        low, high, residence = u(2.2, 2.8), u(4.6, 5.4), u(60, 140)
        barrier = 0.5 * ((high - low) / 2) ** 2 / 8  # curvature 0.5 per hour in each well
        pref = np.sqrt(8 * barrier * 4 * barrier) / ((high - low) / 2) ** 2 / (2 * np.pi)
        role |= dict(well_low=low, well_high=high, barrier=barrier,
                     noise=float(np.sqrt(2 * barrier / np.log(pref * residence))))
    elif kind == "event recovery":
        role |= dict(rate_start=float(sim.rate_for_half_life(u(1.5, 5.0))), sd=u(0.4, 0.6),
                     upsetting_per_week=u(3, 5), kick_per_intensity=0.55)
    elif kind == "gradual worsening":
        role |= dict(mean_end=u(6.0, 6.6), trend_from_day=u(40, 60), trend_to_day=u(95, 105),
                     rate_start=0.3, sd=0.6, expected="hold (phq9)")
    elif kind == "gradual improvement":
        role |= dict(mean_start=u(4.0, 4.6), mean_end=u(2.4, 2.9), trend_to_day=u(80, 110))
    elif kind == "too little data":
        role |= dict(last_day=int(rng.integers(3, 7)), expected="not enough data; refer (silence)")
    if kind in ("stable", "gradual improvement") and u() < 0.04:
        role |= dict(last_day=DAYS - 1 - int(rng.integers(8, 15)), expected="refer (silence)")
    if u() < 0.03:
        role |= dict(consent="withdrawn", expected="withdrawn: no booklet")
    elif u() < 0.05:
        flags = role.get("expected", "")
        role |= dict(feedback="no", expected=f"{flags}; no booklet wanted" if flags
                     else "no booklet wanted")
    return role


def local_to_utc_ns(hours: np.ndarray) -> np.ndarray:
    """Turn local clock hours since START into UTC nanoseconds (whole seconds)."""
    seconds = np.rint(hours * 3600).astype(np.int64)
    naive = (START.astype("datetime64[s]") + seconds.ravel()).astype("datetime64[ns]")
    utc = pd.DatetimeIndex(naive).tz_localize(ZONE, ambiguous="raise", nonexistent="raise")
    return utc.as_unit("ns").asi8.reshape(hours.shape)


def iso_local(utc_ns: np.ndarray) -> np.ndarray:
    """Format UTC nanoseconds as ISO 8601 local times with the UTC offset (+01:00 / +02:00)."""
    utc = pd.DatetimeIndex(utc_ns.astype("datetime64[ns]")).tz_localize("UTC")
    local = utc.tz_convert(ZONE).tz_localize(None).as_unit("ns")
    minutes = (local.asi8 - utc.asi8) // 60_000_000_000
    text = np.datetime_as_string(local.values.astype("datetime64[s]"), unit="s")
    keys, where = np.unique(minutes, return_inverse=True)
    labels = np.array([f"{'+' if m >= 0 else '-'}{abs(m) // 60:02d}:{abs(m) % 60:02d}"
                       for m in keys])
    return np.char.add(text.astype(str), labels[where.reshape(-1)])


def simulate_study(truth: pd.DataFrame, rng: np.random.Generator) -> dict[str, pd.DataFrame]:
    """Simulate prompts, latent mood, items, events and questionnaires for every participant."""
    p = len(truth)
    col = {c: truth[c].to_numpy() for c in truth.columns}
    origin = local_to_utc_ns(np.zeros(1))[0]
    sched_ns = local_to_utc_ns(sim.stratified_times(DAYS, BLOCKS, rng, size=p,
                                                       margin=MARGIN_HOURS))
    n = sched_ns.shape[1]
    day = np.broadcast_to(np.arange(n) // len(BLOCKS), (p, n))
    # Answer latency: mostly minutes, sometimes late; never past the next prompt.
    latency = np.minimum(rng.exponential(5.0, (p, n)), 40.0)
    latency = np.where(rng.random((p, n)) < 0.04, rng.uniform(65, 150, (p, n)), latency)
    room = np.diff(sched_ns, axis=1, append=sched_ns[:, -1:] + 10**13) / 6e10 - 2.0
    answer_ns = sched_ns + np.rint(np.minimum(latency, room) * 60).astype(np.int64) * 10**9
    t = (answer_ns - origin) / 3.6e12
    block_effect = np.tile([-0.06, 0.03, 0.03, 0.03, -0.03], DAYS)
    day_off = rng.random((p, DAYS)) < 0.03
    answered = ((rng.random((p, n)) < col["compliance"][:, None] + block_effect)
                & ~np.take_along_axis(day_off, day, axis=1) & (day <= col["last_day"][:, None]))

    mean = sim.linear_ramp(t, col["trend_from_day"] * 24, col["trend_to_day"] * 24,
                           col["mean_start"], col["mean_end"])
    mean = mean + sim.step_shift(t, np.nan_to_num(col["shift_day"], nan=1e9) * 24,
                                 col["shift_size"])
    rate = sim.linear_ramp(t, col["slowing_from_day"] * 24,
                           np.nan_to_num(col["shift_day"], nan=DAYS) * 24,
                           col["rate_start"], col["rate_end"])
    after = t >= np.nan_to_num(col["shift_day"], nan=1e9)[:, None] * 24
    rate = np.where(after, np.nan_to_num(col["rate_after_shift"])[:, None], rate)

    events = _events(col, rng)
    ev_t = (events["utc_ns"] - origin) / 3.6e12
    ou = (col["dynamics"] != "two states")
    latent = np.empty((p, n))
    kicks = sim.shock_impulses(t[ou], ev_t[ou], events["size"][ou], rate[ou])
    latent[ou] = sim.ou_path(t[ou], mean=mean[ou], rate=rate[ou], noise=col["noise"][ou],
                             rng=rng, kicks=kicks)
    two = ~ou
    if two.any():
        latent[two] = sim.double_well_path(
            t[two], low=col["well_low"][two], high=col["well_high"][two],
            barrier=col["barrier"][two], noise=col["noise"][two], rng=rng,
            event_times=ev_t[two], sizes=events["size"][two])

    items = {}
    for name, offset in (NEGATIVE | POSITIVE).items():
        base = latent if name in NEGATIVE else 8.0 - latent
        items[name] = base + offset + ITEM_NOISE * rng.standard_normal((p, n))
    load = rng.standard_normal((p, DAYS))
    items["stress"] = (3.0 + 1.1 * np.take_along_axis(load, day, axis=1)
                       + 0.4 * (latent - mean) + ITEM_NOISE * rng.standard_normal((p, n)))
    skipped = {k: rng.random((p, n)) < 0.01 for k in items}

    keep = answered.ravel()
    momentary = pd.DataFrame({
        "participant": np.repeat(col["participant"], n)[keep],
        "timestamp": iso_local(answer_ns.ravel()[keep]),
        "scheduled": iso_local(sched_ns.ravel()[keep]),
    })
    for name, values in items.items():
        rated = np.clip(np.rint(values), 1, 7).ravel()[keep]
        momentary[name] = pd.array(np.where(skipped[name].ravel()[keep], np.nan, rated),
                                   dtype="Int64")
    return dict(
        momentary=momentary,
        events=events["table"],
        questionnaires=_questionnaires(col, latent, rng),
        participants=truth[["participant", "language", "consent", "feedback", "therapist",
                            "region"]].copy(),
    )


def _events(col: dict[str, np.ndarray], rng: np.random.Generator) -> dict:
    """Draw upsetting and pleasant events per participant (only while they keep the diary)."""
    p = len(col["participant"])
    weeks = DAYS / 7
    upsetting = rng.poisson(col["upsetting_per_week"] * weeks)
    pleasant = rng.poisson(0.5 * weeks, p)
    width = int((upsetting + pleasant).max())
    slot = np.arange(width)[None, :]
    real = slot < (upsetting + pleasant)[:, None]
    is_upsetting = slot < upsetting[:, None]
    day = rng.integers(0, DAYS, (p, width))
    real &= day <= col["last_day"][:, None]
    raw = np.where(real, day * 24.0 + rng.uniform(8.0, 21.0, (p, width)), np.inf)
    order = np.argsort(raw, axis=1, kind="stable")  # each series' events in time order
    hours = np.take_along_axis(raw, order, axis=1)
    real = np.isfinite(hours)
    is_upsetting = np.take_along_axis(is_upsetting, order, axis=1) & real
    intensity = rng.choice(np.arange(1, 6), size=(p, width), p=[0.1, 0.25, 0.3, 0.22, 0.13])
    kick = col["kick_per_intensity"][:, None] * intensity
    size = np.where(is_upsetting, kick, -0.6 * kick)
    utc_ns = np.full((p, width), np.iinfo(np.int64).max)
    utc_ns[real] = local_to_utc_ns(hours[real])
    kind = np.where(is_upsetting, rng.choice(UPSETTING, (p, width)),
                    rng.choice(PLEASANT, (p, width)))
    table = pd.DataFrame({
        "participant": np.broadcast_to(col["participant"][:, None], (p, width))[real],
        "timestamp": iso_local(utc_ns[real]),
        "kind": kind[real],
        "intensity": intensity[real],
    })
    return dict(utc_ns=np.where(real, utc_ns, 0), size=np.where(real, size, np.nan), table=table)


def _questionnaires(col: dict[str, np.ndarray], latent: np.ndarray,
                    rng: np.random.Generator) -> pd.DataFrame:
    """Weekly phq9 totals from each person's mean latent mood over the preceding 14 days."""
    p = len(col["participant"])
    daily = latent.reshape(p, DAYS, len(BLOCKS)).mean(axis=2)
    days = np.minimum(np.arange(17) * 7, DAYS - 1)
    cum = np.concatenate([np.zeros((p, 1)), np.cumsum(daily, axis=1)], axis=1)
    first = np.where(days == 0, 0, np.maximum(days - 13, 0))
    last = np.where(days == 0, 6, days)  # the intake score reflects the first week
    recent = (cum[:, last + 1] - cum[:, first]) / (last + 1 - first)
    score = np.clip(np.rint(PHQ_SLOPE * (recent - PHQ_AT_ZERO)
                            + PHQ_NOISE * rng.standard_normal(recent.shape)), 0, 27)
    given = (rng.random(score.shape) > 0.1) | (days == 0) | (days == DAYS - 1)
    given &= days[None, :] <= col["last_day"][:, None]
    hours = days * 24.0 + 19.5 + rng.uniform(0, 2, score.shape)
    utc_ns = local_to_utc_ns(hours)
    return pd.DataFrame({
        "participant": np.broadcast_to(col["participant"][:, None], score.shape)[given],
        "timestamp": iso_local(utc_ns[given]),
        "questionnaire": "phq9",
        "score": score[given].astype(int),
    })


def truth_markdown(truth: pd.DataFrame) -> str:
    """Return the known-truth table as Markdown (the README's table between its markers)."""
    lines = ["| participant | language, region | roster | dynamics (latent low mood, 1-7) "
             "| expected |", "|---|---|---|---|---|"]
    for r in truth.itertuples():
        roster = f"consent {r.consent}, feedback {r.feedback}, therapist {r.therapist}"
        lines.append(f"| {r.participant} | {r.language}, {r.region} | {roster} "
                     f"| {describe(r)} | {r.expected or '-'} |")
    return "\n".join(lines)


def describe(r) -> str:
    """Say in words what process a participant's latent mood follows, with its parameters."""
    if r.dynamics == "two states":
        hours = sim.kramers_residence_hours(r.well_low, r.well_high, r.barrier, r.noise)
        text = (f"two states: double well at {r.well_low:.1f} and {r.well_high:.1f}, barrier "
                f"{r.barrier:.4f}, noise {r.noise:.3f}; rate in a state {r.rate_start:.2f}/h; "
                f"about {hours / 24:.0f} days in a state between switches (Kramers)")
    else:
        text = (f"{r.dynamics}: OU mean {r.mean_start:.1f}, rate {r.rate_start:.3f}/h "
                f"(half-life {r.half_life_hours:.1f} h), SD {r.sd:.2f}")
    if r.mean_end != r.mean_start:
        text += (f"; mean moves {r.mean_start:.1f} to {r.mean_end:.1f} between day "
                 f"{r.trend_from_day:.0f} and {r.trend_to_day:.0f}")
    if r.dynamics == "slowing then shift":
        text += (f"; rate falls to {r.rate_end:.2f}/h from day {r.slowing_from_day:.0f} to day "
                 f"{r.shift_day:.0f}, then mean +{r.shift_size:.1f} and rate "
                 f"{r.rate_after_shift:.2f}/h")
    text += (f"; {r.upsetting_per_week:.1f} upsetting events a week, kick "
             f"{r.kick_per_intensity:.2f} x intensity")
    if r.last_day < DAYS - 1:
        text += f"; answers stop after day {r.last_day}"
    return text + f"; answer chance {r.compliance:.0%} a prompt"


def write(frames: dict[str, pd.DataFrame], truth: pd.DataFrame, out: Path) -> None:
    """Write the CSVs, truth.csv, and the study.toml (a copy when `out` is a new folder)."""
    (out / "data").mkdir(parents=True, exist_ok=True)
    for name, frame in frames.items():
        frame.to_csv(out / "data" / f"{name}.csv", index=False, lineterminator="\n")
    truth.to_csv(out / "truth.csv", index=False, lineterminator="\n", float_format="%.6g")
    if out.resolve() == HERE:
        readme = HERE / "README.md"
        text = readme.read_text(encoding="utf-8")
        block = f"{MARK_START}\n{truth_markdown(truth)}\n{MARK_END}"
        text = re.sub(re.escape(MARK_START) + ".*?" + re.escape(MARK_END), lambda _: block,
                      text, flags=re.S)
        readme.write_text(text, encoding="utf-8")
    else:
        settings = (HERE / "study.toml").read_text(encoding="utf-8")
        settings = re.sub(r'^title = ".*"$', f'title = "Tidewater Mood Diary (synthetic, '
                          f'{len(truth)} participants)"', settings, count=1, flags=re.M)
        (out / "study.toml").write_text(settings, encoding="utf-8")


def generate(participants: int = len(CAST), seed: int = SEED) -> tuple[dict, pd.DataFrame]:
    """Return the study's frames and its known truth (no files written)."""
    rng = np.random.default_rng(seed)
    truth = cast_truth(participants, rng)
    return simulate_study(truth, rng), truth


def main(argv: list[str] | None = None) -> int:
    """Parse the command line, generate the study and write it."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--participants", type=int, default=len(CAST))
    parser.add_argument("--out", type=Path, default=HERE)
    parser.add_argument("--seed", type=int, default=SEED)
    args = parser.parse_args(argv)
    if args.participants < 1:
        parser.error("--participants must be at least 1")
    frames, truth = generate(args.participants, args.seed)
    write(frames, truth, args.out)
    rows = len(frames["momentary"])
    print(f"wrote {args.participants} participants, {rows} answered prompts to {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
