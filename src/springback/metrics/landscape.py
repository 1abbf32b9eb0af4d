"""The mood landscape: a kernel density of the composite turned into a quasi-potential.

Potential analysis (Livina, Kwasniok & Lenton 2010, "Potential analysis reveals changing number
of climate states during the last 60 kyr", Climate of the Past 6:77-82): for dz = -U'(z)dt +
sigma dW the stationary density is p ~ exp(-2U/sigma^2), so U(z) = -ln p(z) up to the factor
sigma^2/2 and a constant; valleys of U are the modes of p. Here p is a Gaussian kernel density
(`scipy.stats.gaussian_kde`) instead of their polynomial fit, because ESM data are short.

Bandwidth rule: Silverman's rule of thumb (Silverman 1986, "Density Estimation for Statistics
and Data Analysis", eq. 3.31 in scipy's form: factor (3n/4)^(-1/5) times the sample SD), but
never narrower than the scale step (for a composite: the items' step divided by the typical
number of items answered), because a kernel narrower than a Likert step turns every answer
option into its own peak. The density is
reflected at the scale bounds (Silverman 1986, section 2.10) so that answers at the floor or
ceiling are not pushed outside the scale.

Robust valley count: valleys are local minima of U on a grid. A valley counts only if it is at
least MIN_DEPTH deep (the potential barrier to its lower neighbour, in units of -ln p: the
density at the barrier is at most exp(-0.2) = 82% of that at the valley) and holds at least
MIN_SHARE of the answers in its basin; shallower or emptier valleys are merged into their
neighbour, shallowest first. This is repeated at BANDWIDTH_MULTIPLIERS x the rule's bandwidth,
and the number reported is the smallest count found, so a valley must survive the whole range.
The range stops at 1.25 because Silverman's rule already oversmooths two-peaked data (Silverman
1986, section 3.4.2): in our seeded double-well simulations a 1.5x bandwidth erased a real
second valley in about half of the runs, while single-well runs (continuous, skewed and Likert)
gave one valley in all of 190 runs at the chosen settings (tests/test_shifts_landscape.py).

Second opinions: the bimodality coefficient (Pfister, Schwarz, Janczyk, Dale & Freeman 2013,
"Good things peak in pairs: a note on the bimodality coefficient", Frontiers in Psychology
4:700) with bias-corrected skewness and excess kurtosis (Joanes & Gill 1998), and Hartigan's
dip test (Hartigan & Hartigan 1985, "The dip test of unimodality", Annals of Statistics
13:70-84) from the `diptest` package with `allow_zero=False`. The dip test assumes continuous
data, so for the booklet each value is spread uniformly over its rounding cell (item step /
items answered; seeded), undoing the rating scale's lattice (dequantisation, common practice);
the raw `dip_test` is kept for checks.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from typing import Any

import diptest
import numpy as np
import pandas as pd
from scipy import stats

from springback.metrics import states
from springback.metrics._series import Series
from springback.metrics.results import Estimate, Family
from springback.metrics.shifts import daily_means
from springback.metrics.surrogates import participant_rng
from springback.model import ParticipantData
from springback.settings import StudySettings

BANDWIDTH_RULE = "Silverman, at least one scale step, reflected at the scale bounds"
BANDWIDTH_MULTIPLIERS = (0.8, 1.0, 1.25)
MIN_DEPTH = 0.2
MIN_SHARE = 0.10
GRID_POINTS = 241
BC_THRESHOLD = 5.0 / 9.0
"""The bimodality coefficient of a uniform distribution; above it suggests two peaks."""


@dataclass(frozen=True)
class Landscape:
    """Density, potential and robust valleys of one sample on a grid."""

    grid: np.ndarray
    density: np.ndarray
    potential: np.ndarray
    bandwidth: float
    """Kernel SD in scale points at the rule's bandwidth."""
    valleys: tuple[int, ...]
    """Grid indices of the valleys that survive the robustness rule, left to right."""
    depths: tuple[float, ...]
    """Barrier height of each valley to its lower neighbouring barrier (NaN for a lone valley)."""
    shares: tuple[float, ...]
    """Share of answers in each valley's basin."""
    barriers: tuple[int, ...]
    """Grid index of the highest potential between neighbouring valleys."""
    counts: tuple[int, ...]
    """Valleys found at each bandwidth multiplier (before taking the smallest)."""


def scale_step(x: np.ndarray) -> float:
    """Return the smallest gap between distinct answers (the scale's step), 0 if one value."""
    values = np.unique(np.round(np.asarray(x, dtype=float), 9))
    return float(np.min(np.diff(values))) if values.size > 1 else 0.0


def silverman_factor(n: int) -> float:
    """Return Silverman's bandwidth factor for one dimension, (3n/4)^(-1/5)."""
    return (n * 3.0 / 4.0) ** (-1.0 / 5.0)


def kde_density(
    x: np.ndarray, grid: np.ndarray, factor: float, bounds: tuple[float, float] | None = None
) -> np.ndarray:
    """Evaluate a Gaussian KDE with a bandwidth factor on a grid, reflected at the bounds.

    Without bounds this is exactly `scipy.stats.gaussian_kde(x, bw_method=factor)(grid)`
    (kernel SD = factor x the sample SD with ddof 1; the tests check the equality). It is
    evaluated here on the distinct answers with their counts, because answers repeat a lot and
    scipy's general d-dimensional evaluation is many times slower for one dimension.
    """
    x = np.asarray(x, dtype=float)
    h = factor * float(np.std(x, ddof=1))
    values, counts = np.unique(x, return_counts=True)
    weights = counts / x.size

    def at(points: np.ndarray) -> np.ndarray:
        z = (points[:, None] - values[None, :]) / h
        return np.exp(-0.5 * z * z) @ weights / (h * math.sqrt(2.0 * math.pi))

    density = at(np.asarray(grid, dtype=float))
    if bounds is not None:
        lo, hi = bounds
        density = density + at(2.0 * lo - grid) + at(2.0 * hi - grid)
    return density


def potential_of(density: np.ndarray, sigma: float = math.sqrt(2.0)) -> np.ndarray:
    """Return U = -(sigma^2 / 2) ln p; the default sigma = sqrt 2 gives U = -ln p.

    Empty grid points get a finite ceiling (the log of the smallest positive float).
    """
    floor = np.finfo(float).tiny
    return -(sigma * sigma / 2.0) * np.log(np.maximum(density, floor))


def local_minima(u: np.ndarray) -> np.ndarray:
    """Return grid indices of local minima of U, including minima at either end of the grid."""
    u = np.asarray(u, dtype=float)
    inner = np.flatnonzero((u[1:-1] < u[:-2]) & (u[1:-1] <= u[2:])) + 1
    ends = []
    if u.size > 1 and u[0] < u[1]:
        ends.append(0)
    if u.size > 1 and u[-1] < u[-2]:
        ends.append(u.size - 1)
    return np.unique(np.concatenate([inner, np.array(ends, dtype=int)])).astype(int)


def _barriers(u: np.ndarray, minima: list[int]) -> list[int]:
    """Return the index of the highest U between each pair of neighbouring minima."""
    return [a + int(np.argmax(u[a:b + 1])) for a, b in itertools.pairwise(minima)]


def _depths_shares(
    u: np.ndarray, grid: np.ndarray, x: np.ndarray, minima: list[int]
) -> tuple[list[int], list[float], list[float]]:
    """Return barriers, depth and basin share of each minimum."""
    bars = _barriers(u, minima)
    depths, shares = [], []
    edges = [-math.inf, *(grid[b] for b in bars), math.inf]
    for k, m in enumerate(minima):
        sides = [u[bars[k - 1]]] if k > 0 else []
        sides += [u[bars[k]]] if k < len(bars) else []
        depths.append(min(sides) - u[m] if sides else math.nan)
        shares.append(float(np.mean((x > edges[k]) & (x <= edges[k + 1]))))
    return bars, depths, shares


def robust_valleys(
    u: np.ndarray, grid: np.ndarray, x: np.ndarray, min_depth: float = MIN_DEPTH,
    min_share: float = MIN_SHARE, keep_at_most: int | None = None,
) -> tuple[list[int], list[float], list[float], list[int]]:
    """Merge shallow or rarely visited valleys, shallowest first; return minima and their facts."""
    minima = [int(m) for m in local_minima(u)]
    if not minima:
        minima = [int(np.argmin(u))]
    while True:
        bars, depths, shares = _depths_shares(u, grid, x, minima)
        if len(minima) == 1:
            return minima, depths, shares, bars
        too_many = keep_at_most is not None and len(minima) > keep_at_most
        weak = [k for k in range(len(minima))
                if depths[k] < min_depth or shares[k] < min_share or too_many]
        if not weak:
            return minima, depths, shares, bars
        # Why: removing the shallowest first mirrors merging basins from the weakest upward.
        drop = min(weak, key=lambda k: (depths[k], shares[k]))
        del minima[drop]


def landscape(
    x: np.ndarray, bounds: tuple[float, float],
    multipliers: tuple[float, ...] = BANDWIDTH_MULTIPLIERS, grid_points: int = GRID_POINTS,
    step: float | None = None,
) -> Landscape:
    """Estimate density, potential and robust valleys of a bounded sample.

    `step` is the answers' lattice spacing, the narrowest kernel allowed (default: the smallest
    gap between distinct answers).
    """
    x = np.asarray(x, dtype=float)
    sd = float(np.std(x, ddof=1))
    step = scale_step(x) if step is None else step
    base = max(silverman_factor(x.size), step / sd if sd > 0 else 1.0)
    grid = np.linspace(bounds[0], bounds[1], grid_points)
    counts = []
    for mult in multipliers:
        u = potential_of(kde_density(x, grid, base * mult, bounds))
        counts.append(len(robust_valleys(u, grid, x)[0]))
    density = kde_density(x, grid, base, bounds)
    u = potential_of(density)
    minima, depths, shares, bars = robust_valleys(u, grid, x, keep_at_most=min(counts))
    return Landscape(
        grid=grid, density=density, potential=u, bandwidth=base * sd,
        valleys=tuple(minima), depths=tuple(depths), shares=tuple(shares),
        barriers=tuple(bars), counts=tuple(counts),
    )


def rounding_cell(items: np.ndarray, fallback: float) -> np.ndarray:
    """Return each composite value's lattice spacing: the items' step / items answered.

    A mean of m ratings on a scale with step d lies on a grid of spacing d / m; single items
    (one column) give the item's step. `fallback` is used when no step can be seen.
    """
    items = np.atleast_2d(np.asarray(items, dtype=float))
    steps = [scale_step(col[np.isfinite(col)]) for col in items.T]
    steps = [d for d in steps if d > 0]
    d = min(steps) if steps else fallback
    answered = np.maximum(np.isfinite(items).sum(axis=1), 1)
    return d / answered


def bimodality_coefficient(x: np.ndarray) -> float:
    """Return (g^2 + 1) / (k + 3(n-1)^2/((n-2)(n-3))) with bias-corrected g and excess k."""
    x = np.asarray(x, dtype=float)
    n = x.size
    g = float(stats.skew(x, bias=False))
    k = float(stats.kurtosis(x, fisher=True, bias=False))
    return (g * g + 1.0) / (k + 3.0 * (n - 1) ** 2 / ((n - 2) * (n - 3)))


def dip_test(x: np.ndarray) -> tuple[float, float]:
    """Return Hartigan's dip statistic and its p-value (table interpolation, allow_zero=False)."""
    dip, p = diptest.diptest(np.asarray(x, dtype=float), allow_zero=False)
    return float(dip), float(p)


# ---------------------------------------------------------------------------------------
# The family: landscape, states, flickering and the daily-load table

MIN_PROMPTS = 40
"""A kernel density from fewer answers is too rough to count valleys (common practice)."""
MIN_DISTINCT = 3
STATE_NAMES = {states.LOW: "low", states.HIGH: "high", states.NONE: ""}


def load_table(
    series: Series, data: ParticipantData, settings: StudySettings
) -> pd.DataFrame | None:
    """Return study_day, load and mood (daily means) when `events.daily_load` is set."""
    load = settings.events.daily_load
    if load is None:
        return None
    mood = daily_means(series.study_day, series.value).set_index("study_day")["mean"]
    if load == "events":
        ev = data.events
        if "upsetting" in ev.columns:
            ev = ev[ev["upsetting"].astype(bool)]
        hh, mm = (int(p) for p in settings.study.day_start.split(":"))
        local = pd.to_datetime(ev["local_time"])
        # Why: the same day-start shift as intake uses for study_day, so both series align.
        shifted = local - pd.Timedelta(hours=hh, minutes=mm)
        days = (shifted.dt.tz_localize(None) if shifted.dt.tz is not None else shifted)
        per_day = days.dt.normalize().value_counts()
        values = per_day.reindex(mood.index, fill_value=0).astype(float)
    else:
        rows = data.momentary
        values = daily_means(rows["study_day"].to_numpy(), rows[load].to_numpy(
            dtype=float, na_value=np.nan)).set_index("study_day")["mean"]
        values = values.reindex(mood.index)
    return pd.DataFrame({"study_day": mood.index, "load": values.to_numpy(dtype=float),
                         "mood": mood.to_numpy()}).reset_index(drop=True)


def _missing_all(reason: str, n: int) -> dict[str, Estimate]:
    """Every landscape estimate missing for the same reason."""
    names = ("landscape_valleys", "bimodality_coefficient", "dip_p", "switches",
             "residence_hours_low", "residence_hours_high", "flicker_tau", "flicker_p")
    return {name: Estimate.missing(reason, n=n) for name in names}


def landscape_family(series: Series, data: ParticipantData, settings: StudySettings) -> Family:
    """Compute the landscape, two-state residence times and flickering for one participant."""
    x = series.value
    n = x.size
    bounds = series.scale
    tables: dict[str, pd.DataFrame] = {}
    load = load_table(series, data, settings)
    if load is not None:
        tables["load"] = load
    params: dict[str, Any] = {
        "bandwidth_rule": BANDWIDTH_RULE, "multipliers": list(BANDWIDTH_MULTIPLIERS),
        "min_depth": MIN_DEPTH, "min_share": MIN_SHARE,
        "potential_units": "-ln density (sigma^2/2 = 1)",
        "state_names": "'low' and 'high' are values of the composite, not better or worse",
    }
    distinct = np.unique(x).size
    if n < MIN_PROMPTS or distinct < MIN_DISTINCT:
        reason = (f"the landscape needs at least {MIN_PROMPTS} answers with at least "
                  f"{MIN_DISTINCT} different values; there were {n} answers with {distinct}")
        return Family(estimates=_missing_all(reason, n), tables=tables, params=params)
    cell = rounding_cell(series.items, scale_step(x))
    # Why: a composite of k items lives on a lattice of spacing step/k, not on the smallest gap
    # between its distinct values (which mixes lattices of different k).
    step = max(scale_step(x), float(np.median(cell)))
    land = landscape(x, bounds, step=step)
    bc = bimodality_coefficient(x)
    # Why: the dip test assumes a continuous distribution; the lattice of a rating scale makes
    # its p-value near 0 for any sample, so each value is spread over its own rounding cell.
    jitter = participant_rng(settings.metrics.seed, data.participant, "dip").uniform(
        -0.5, 0.5, n) * cell
    dip, dip_p = dip_test(x + jitter)
    k = len(land.valleys)
    tables["potential"] = pd.DataFrame(
        {"x": land.grid, "density": land.density, "potential": land.potential})
    tables["valleys"] = pd.DataFrame({"x": land.grid[list(land.valleys)],
                                      "depth": list(land.depths), "share": list(land.shares)})
    params.update(bandwidth=land.bandwidth, step=step, counts=list(land.counts),
                  dip_ties="spread over each value's rounding cell (item step / items answered)")
    est = {
        "landscape_valleys": Estimate(
            float(k), n=n, note=f"valleys found at {', '.join(map(str, BANDWIDTH_MULTIPLIERS))} "
            f"x the bandwidth: {', '.join(map(str, land.counts))}; the smallest is reported"),
        "bimodality_coefficient": Estimate(
            bc, n=n, note=f"above {BC_THRESHOLD:.3f} suggests two peaks (Pfister et al. 2013)"),
        "dip_p": Estimate(dip_p, n=n, note=f"Hartigan's dip test, dip = {dip:.3f}"),
    }
    label = np.full(n, states.NONE)
    if k == 2:
        low_v, high_v = (float(land.grid[v]) for v in land.valleys)
        barrier = float(land.grid[land.barriers[0]])
        low_core, high_core = states.core_bounds(low_v, barrier, high_v)
        params.update(low_valley=low_v, high_valley=high_v, barrier=barrier,
                      low_core=low_core, high_core=high_core)
        label = states.classify(x, low_core, high_core)
        est.update(_two_state_estimates(series, data.participant, settings, label))
    else:
        reason = (f"time in each state needs two valleys in the landscape; "
                  f"there {'was' if k == 1 else 'were'} {k}")
        for name in ("switches", "residence_hours_low", "residence_hours_high",
                     "flicker_tau", "flicker_p"):
            est[name] = Estimate.missing(reason, n=n)
    tables["states"] = pd.DataFrame({"local_time": series.local_time, "value": x,
                                     "state": [STATE_NAMES[int(v)] for v in label]})
    return Family(estimates=est, tables=tables, params=params)


def _two_state_estimates(
    series: Series, participant: str, settings: StudySettings, label: np.ndarray
) -> dict[str, Estimate]:
    """Switches, residence times and the flickering trend for a two-valley landscape."""
    m = settings.metrics
    n = label.size
    kinds, durations, exited = states.stays(label, series.hours)
    n_switches = int(states.switch_indicator(label).sum())
    est = {"switches": Estimate(float(n_switches), n=n,
                                note="changes of state, with a hysteresis band at the border")}
    rng = participant_rng(m.seed, participant, "residence")
    for state, name in ((states.LOW, "low"), (states.HIGH, "high")):
        r = states.residence(state, kinds, durations, exited, rng)
        key = f"residence_hours_{name}"
        if r.mean_hours is None:
            est[key] = Estimate.missing(
                f"no completed stay in the {name} state was seen", n=r.stays)
        else:
            est[key] = Estimate(
                r.mean_hours, r.lower, r.upper, n=r.stays,
                note=f"{r.hours_in_state:.0f} h in the state over {r.stays} stays with "
                     f"{r.exits} exits; 95% bootstrap interval")
    window = round(m.window * n)
    if n_switches < states.MIN_SWITCHES_FLICKER or window < 2:
        reason = (f"a trend in switching needs at least {states.MIN_SWITCHES_FLICKER} "
                  f"switches; there were {n_switches}")
        est["flicker_tau"] = Estimate.missing(reason, n=n_switches)
        est["flicker_p"] = Estimate.missing(reason, n=n_switches)
        return est
    rng = participant_rng(m.seed, participant, "flicker")
    tau, p, _ = states.flicker_trend(label, window, m.surrogates, rng)
    note = f"Kendall tau of switches in rolling windows of {window} prompts"
    est["flicker_tau"] = (Estimate(tau, n=n_switches, note=note) if math.isfinite(tau) else
                          Estimate.missing("the number of switches per window did not change"))
    est["flicker_p"] = (
        Estimate(p, n=m.surrogates, note="one-sided (rise), surrogates with stays shuffled")
        if p is not None and math.isfinite(p)
        else Estimate.missing("too few stays to shuffle for a significance test"))
    return est
