"""The example study: committed data equal a fresh run, settings validate, the truth holds.

Also checks the simulators of springback.simulate against closed-form results of the processes
they simulate, so tests elsewhere can rely on their known parameters.
"""

from __future__ import annotations

import importlib.util
import re
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from statsmodels.tsa.stattools import acf

from springback import simulate as sim
from springback.settings import load_settings

REPO = Path(__file__).resolve().parents[2]
EXAMPLE = REPO / "example_project"
DATA = ("momentary.csv", "participants.csv", "events.csv", "questionnaires.csv")
ISO = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d[+-]\d\d:\d\d$")


def _generator():
    spec = importlib.util.spec_from_file_location("example_generate", EXAMPLE / "generate.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


gen = _generator()


@pytest.fixture(scope="module")
def fresh(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The example study regenerated from scratch into a temporary folder."""
    out = tmp_path_factory.mktemp("regenerated")
    assert gen.main(["--out", str(out)]) == 0
    return out


@pytest.fixture(scope="module")
def data() -> dict[str, pd.DataFrame]:
    """The committed example data, with answer times parsed."""
    frames = {name[:-4]: pd.read_csv(EXAMPLE / "data" / name, dtype={"participant": str})
              for name in DATA}
    for frame in frames.values():
        if "timestamp" in frame:
            frame["time"] = pd.to_datetime(frame["timestamp"], utc=True)
    return frames


@pytest.fixture(scope="module")
def truth() -> pd.DataFrame:
    return pd.read_csv(EXAMPLE / "truth.csv", dtype={"participant": str}).set_index("participant")


# -- reproducibility --------------------------------------------------------------------------

@pytest.mark.parametrize("name", [*(f"data/{n}" for n in DATA), "truth.csv"])
def test_committed_files_equal_a_fresh_regeneration(fresh: Path, name: str) -> None:
    """Check that the committed data are byte for byte what the generator writes today."""
    assert (fresh / name).read_bytes() == (EXAMPLE / name).read_bytes()


def test_readme_truth_table_is_the_generators(fresh: Path) -> None:
    """Check that the README's known-truth table is the one made from the generator's truth."""
    truth = pd.read_csv(fresh / "truth.csv", dtype={"participant": str, "expected": str})
    truth["expected"] = truth["expected"].fillna("")
    readme = (EXAMPLE / "README.md").read_text(encoding="utf-8")
    block = readme.split(gen.MARK_START)[1].split(gen.MARK_END)[0].strip()
    assert block == gen.truth_markdown(truth)


def test_a_larger_study_has_the_same_shape(tmp_path: Path) -> None:
    """Check that --participants N makes N people: the example roles first, then a mix."""
    assert gen.main(["--participants", "40", "--out", str(tmp_path), "--seed", "7"]) == 0
    roster = pd.read_csv(tmp_path / "data" / "participants.csv")
    truth = pd.read_csv(tmp_path / "truth.csv")
    assert list(roster["participant"]) == [f"P{i:02d}" for i in range(1, 41)]
    assert list(truth["dynamics"][:12]) == [role["dynamics"] for role in gen.CAST]
    assert truth["dynamics"][12:].isin(set(truth["dynamics"][:12])).all()
    momentary = pd.read_csv(tmp_path / "data" / "momentary.csv")
    assert set(momentary["participant"]) <= set(roster["participant"])
    settings, warnings = load_settings(tmp_path)
    assert settings.study.title == "Tidewater Mood Diary (synthetic, 40 participants)"
    assert warnings == []


# -- settings ---------------------------------------------------------------------------------

def test_settings_validate_without_warnings() -> None:
    """Check that study.toml validates cleanly and uses every section the example promises."""
    settings, warnings = load_settings(EXAMPLE)
    assert warnings == []
    assert settings.study.languages == ["en", "nl", "de"]
    assert set(settings.study.answers_checked) == {"en", "nl", "de"}
    assert settings.about == "low_mood" and settings.higher_is_worse("low_mood")
    assert settings.events.daily_load == "stress"
    for name, item in settings.items.items():
        assert set(item.label) == {"en", "nl", "de"}, name
    reversed_items = {n for n, i in settings.items.items() if i.reverse}
    assert reversed_items == {"cheerful", "relaxed", "content"}
    # Kroenke, Spitzer & Williams 2001, J Gen Intern Med 16:606-613: bands at 5, 10, 15, 20.
    assert [b for b, _ in settings.questionnaires["phq9"].bands] == [0, 5, 10, 15, 20]
    assert {(r.action, r.shift, r.silence_days) for r in settings.safety.rules} == {
        ("hold", False, None), ("refer", True, None), ("refer", False, 7)}


@pytest.mark.parametrize("region", ["north", "south"])
@pytest.mark.parametrize("language", ["en", "nl", "de"])
def test_every_region_and_language_has_fictional_referral_texts(region: str,
                                                                   language: str) -> None:
    """Check that each region x language has the full ladder, with only fictional numbers."""
    settings, _ = load_settings(EXAMPLE)
    referral = settings.referral_for(region, language)
    assert referral is not None and referral.region == region
    for rung in ("questions", "feeling_worse", "self_harm", "emergency"):
        text = getattr(referral, rung)
        numbers = re.findall(r"\+\d+[\d ]*\d", text)
        assert numbers, (rung, text)
        for number in numbers:
            assert number.startswith("+99 "), number
            assert f"{number} (fictional)" in text or "(fictional) " in text, text


# -- data contract ----------------------------------------------------------------------------

def test_roster_mixes_languages_consent_and_editions(data: dict[str, pd.DataFrame]) -> None:
    """Check the roster columns and the mix of languages, consent, feedback and regions."""
    roster = data["participants"]
    assert list(roster.columns) == ["participant", "language", "consent", "feedback",
                                    "therapist", "region"]
    assert roster["language"].value_counts().min() >= 3
    assert set(roster["language"]) == {"en", "nl", "de"}
    assert list(roster.loc[roster["consent"] == "withdrawn", "participant"]) == ["P10"]
    assert list(roster.loc[roster["feedback"] == "no", "participant"]) == ["P11"]
    assert set(roster["therapist"]) == {"yes", "no"}
    assert set(roster["region"]) == {"north", "south"}


def test_momentary_times_carry_the_right_offset(data: dict[str, pd.DataFrame]) -> None:
    """Check ISO 8601 times with the Amsterdam offset of their date, across the DST change."""
    m = data["momentary"]
    assert list(m.columns[:3]) == ["participant", "timestamp", "scheduled"]
    for column in ("timestamp", "scheduled"):
        assert m[column].str.match(ISO).all()
        utc = pd.to_datetime(m[column], utc=True)
        local = utc.dt.tz_convert("Europe/Amsterdam")
        offset = local.dt.strftime("%z").str.replace(r"(\d\d)(\d\d)$", r"\1:\2", regex=True)
        assert (m[column].str[-6:] == offset).all()
    assert set(m["timestamp"].str[-6:]) == {"+01:00", "+02:00"}
    scheduled = pd.to_datetime(m["scheduled"], utc=True)
    latency = (m["time"] - scheduled).dt.total_seconds() / 60
    assert (latency >= 0).all() and 0.01 < (latency > 60).mean() < 0.08
    hours = scheduled.dt.tz_convert("Europe/Amsterdam").dt.hour
    assert hours.between(8, 21).all()


def test_ratings_are_on_the_scale_with_a_few_skipped(data: dict[str, pd.DataFrame]) -> None:
    """Check that ratings are whole numbers 1-7 and about 1% of single items are skipped."""
    items = data["momentary"][["down", "anxious", "irritated", "tense", "cheerful", "relaxed",
                               "content", "stress"]]
    values = items.stack().dropna()
    assert values.between(1, 7).all() and (values == values.round()).all()
    assert 0.003 < items.isna().mean().mean() < 0.03


def test_unanswered_prompts_are_realistic(data: dict[str, pd.DataFrame],
                                          truth: pd.DataFrame) -> None:
    """Check that people who kept the diary to the end left 15-35% of 560 prompts unanswered."""
    answered = data["momentary"].groupby("participant").size()
    full = truth.index[truth["last_day"] == gen.DAYS - 1]
    unanswered = 1 - answered[full] / (gen.DAYS * len(gen.BLOCKS))
    assert unanswered.between(0.15, 0.35).all(), unanswered


# -- the known truth shows in the data --------------------------------------------------------

def _composite(m: pd.DataFrame) -> pd.Series:
    negative = m[["down", "anxious", "irritated", "tense"]]
    positive = 8 - m[["cheerful", "relaxed", "content"]]
    return pd.concat([negative, positive], axis=1).mean(axis=1)


def test_too_little_data_and_silence(data: dict[str, pd.DataFrame], truth: pd.DataFrame) -> None:
    """Check that P09 has under 30 answers and P09, P12 are silent for 7+ days at the end."""
    m = data["momentary"]
    answered = m.groupby("participant").size()
    assert answered["P09"] < 30 and (answered.drop("P09") >= 300).all()
    end = m["time"].max()
    silent = (end - m.groupby("participant")["time"].max()).dt.days
    assert set(silent[silent >= 7].index) == {"P09", "P12"}
    assert set(truth.index[truth["last_day"] < gen.DAYS - 1]) == {"P09", "P12"}


def test_only_the_worsening_participant_scores_severe_late(
        data: dict[str, pd.DataFrame]) -> None:
    """Check that only P08 has a phq9 of 20 or more in the last 28 days (the hold rule)."""
    q = data["questionnaires"]
    assert set(q["questionnaire"]) == {"phq9"} and q["score"].between(0, 27).all()
    recent = q[q["time"] >= q["time"].max() - pd.Timedelta(days=28)]
    assert set(recent.loc[recent["score"] >= 20, "participant"]) == {"P08"}


def test_the_shift_participant_is_worse_after_day_77(data: dict[str, pd.DataFrame]) -> None:
    """Check that P05's composite is much worse after the shift than in the month before."""
    m = data["momentary"][data["momentary"]["participant"] == "P05"]
    day = (m["time"] - m["time"].min()).dt.days
    mood = _composite(m)
    assert mood[day >= 80].mean() - mood[(day >= 50) & (day < 75)].mean() > 1.2
    # Critical slowing down before the shift (Scheffer et al. 2009, Nature 461:53-59): carry-over
    # between same-day prompts and the spread rise as the rate falls from day 28 to day 77.
    early, late = (day < 28), (day >= 49) & (day < 77)
    assert _same_day_lag1(m[late], mood[late]) > _same_day_lag1(m[early], mood[early]) + 0.2
    assert mood[late].std() > 1.4 * mood[early].std()


def _same_day_lag1(m: pd.DataFrame, mood: pd.Series) -> float:
    local = m["time"].dt.tz_convert("Europe/Amsterdam") - pd.Timedelta(hours=4)
    same = (local.dt.date.to_numpy()[1:] == local.dt.date.to_numpy()[:-1])
    values = mood.to_numpy()
    return float(np.corrcoef(values[:-1][same], values[1:][same])[0, 1])


def test_the_two_state_participant_has_two_clusters(data: dict[str, pd.DataFrame]) -> None:
    """Check that P06's composite spends at least a fifth of the answers near each state."""
    m = data["momentary"]
    mood = _composite(m[m["participant"] == "P06"])
    assert (mood < 3.2).mean() > 0.2 and (mood > 4.2).mean() > 0.2


def test_the_event_participant_reports_the_most_upsetting_events(
        data: dict[str, pd.DataFrame], truth: pd.DataFrame) -> None:
    """Check that P07 reports by far the most upsetting events, with a 3-hour half-life."""
    e = data["events"]
    upsetting = e[e["kind"].isin(gen.UPSETTING)].groupby("participant").size()
    assert upsetting.idxmax() == "P07" and upsetting["P07"] > 2 * upsetting.drop("P07").max()
    assert truth.loc["P07", "half_life_hours"] == pytest.approx(3.0)
    assert e["intensity"].between(1, 5).all()


# -- the simulators ---------------------------------------------------------------------------

def test_ou_sampled_regularly_is_an_ar1_with_phi_exp_minus_rate() -> None:
    """Check phi = exp(-rate dt) and variance noise^2 / (2 rate) on a long regular series."""
    # Standard OU result (from memory; Gardiner 2009, "Stochastic methods", §3.8.4): rate
    # 0.223144/h gives phi 0.8 at 1 h and half-life 3.106284 h (computed by hand);
    # statsmodels' acf is the outside estimator.
    rng = np.random.default_rng(11)
    x = sim.ou_path(np.arange(40_000.0), mean=3.0, rate=0.223144, noise=1.0, rng=rng)
    assert acf(x, nlags=1, fft=True)[1] == pytest.approx(0.8, abs=0.01)
    assert x.var() == pytest.approx(1.0 / (2 * 0.223144), rel=0.06)
    assert sim.half_life(0.223144) == pytest.approx(3.106284, abs=1e-5)


def test_ou_on_irregular_times_matches_the_gap_dependent_autocorrelation() -> None:
    """Check that pairs about 3 h apart correlate exp(-3 rate), pairs 0.5 h apart exp(-0.5 rate)."""
    rng = np.random.default_rng(5)
    t = np.cumsum(rng.choice([0.5, 3.0], size=60_000))
    x = sim.ou_path(t, mean=0.0, rate=0.3, noise=0.5, rng=rng)
    gap = np.diff(t)
    for d in (0.5, 3.0):
        pick = gap == d
        r = np.corrcoef(x[:-1][pick], x[1:][pick])[0, 1]
        assert r == pytest.approx(np.exp(-0.3 * d), abs=0.02)


def test_a_kick_decays_with_the_known_half_life() -> None:
    """Check that an event's kick in a noiseless OU halves every ln 2 / rate hours."""
    t = np.arange(0.0, 40.0, 0.5)
    events, sizes = np.array([4.2, 20.0]), np.array([2.0, 1.0])
    rate = sim.rate_for_half_life(3.0)
    kicks = sim.shock_impulses(t, events, sizes, rate)
    x = sim.ou_path(t, mean=0.0, rate=rate, noise=1e-12, rng=np.random.default_rng(0),
                    start=0.0, kicks=kicks)
    expected = sizes[0] * 2 ** (-(t - 4.2) / 3.0) * (t >= 4.2)
    expected += sizes[1] * 2 ** (-(t - 20.0) / 3.0) * (t >= 20.0)
    np.testing.assert_allclose(x, expected, atol=1e-9)
    np.testing.assert_allclose(sim.shock_response(t, events, sizes, 3.0), expected, atol=1e-12)


def test_padded_events_of_several_series_match_one_by_one() -> None:
    """Check that NaN-padded events for a batch give the same kicks as each series alone."""
    rng = np.random.default_rng(2)
    t = np.sort(rng.uniform(0, 100, (3, 50)), axis=1)
    events = np.array([[5.0, 50.0, np.nan], [np.nan, np.nan, np.nan], [1.0, 99.9, 200.0]])
    sizes = np.where(np.isnan(events), np.nan, 1.5)
    batch = sim.shock_impulses(t, events, sizes, np.array([0.2, 0.3, 0.4]))
    for i, rate in enumerate((0.2, 0.3, 0.4)):
        ok = ~np.isnan(events[i])
        np.testing.assert_allclose(batch[i], sim.shock_impulses(t[i], events[i][ok],
                                                                sizes[i][ok], rate))


def test_double_well_residence_is_near_the_kramers_time() -> None:
    """Check the double well's curvature and that the mean time between switches is Kramers'."""
    low, high, barrier, noise = 2.4, 5.0, 0.1056, 0.354
    h = 1e-5
    curvature = -(sim.double_well_drift(low + h, low, high, barrier)
                  - sim.double_well_drift(low - h, low, high, barrier)) / (2 * h)
    assert curvature == pytest.approx(sim.well_rate(low, high, barrier), rel=1e-6)
    hours, series = 2_000.0, 8
    x = sim.double_well_path(np.tile(np.arange(0.0, hours, 1.0), (series, 1)), low=low,
                             high=high, barrier=barrier, noise=noise,
                             rng=np.random.default_rng(4))
    # Switches counted with hysteresis: a switch needs a move to within 0.8 of the other well.
    switches = 0
    for row in x:
        state = row[0] > 3.7
        for v in row:
            if (not state and v > high - 0.8) or (state and v < low + 0.8):
                state, switches = not state, switches + 1
    # Kramers 1940 escape rate (from memory); a rough guide at this barrier, hence factor 1.6.
    expected = sim.kramers_residence_hours(low, high, barrier, noise)
    assert expected / 1.6 < series * hours / (switches + series) < expected * 1.6
    assert 0.3 < (x < 3.7).mean() < 0.7


def test_stratified_times_put_one_prompt_in_each_block() -> None:
    """Check one time per block per day, inside the block, and at least the margin apart."""
    blocks = ((8.0, 10.8), (10.8, 13.6), (13.6, 16.4), (16.4, 19.2), (19.2, 22.0))
    t = sim.stratified_times(30, blocks, np.random.default_rng(1), size=4, margin=0.25)
    assert t.shape == (4, 150)
    clock = (t % 24).reshape(4, 30, 5)
    for b, (lo, hi) in enumerate(blocks):
        assert ((clock[..., b] >= lo) & (clock[..., b] < hi - 0.25)).all()
    assert (np.diff(t, axis=1) > 0.25).all()
    with pytest.raises(ValueError, match="non-overlapping"):
        sim.stratified_times(1, ((9.0, 12.0), (11.0, 13.0)), np.random.default_rng(1))


def test_ramps_and_shifts() -> None:
    """Check the piecewise-linear ramp and the step shift at their corners."""
    t = np.array([[0.0, 10.0, 15.0, 20.0, 30.0]])
    np.testing.assert_allclose(sim.linear_ramp(t, 10.0, 20.0, 0.5, 0.1),
                               [[0.5, 0.5, 0.3, 0.1, 0.1]])
    np.testing.assert_allclose(sim.step_shift(t, np.array([15.0]), np.array([2.0])),
                               [[0, 0, 2, 2, 2]])
