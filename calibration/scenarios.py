"""Seeded generating processes, each with the answer the consultation should give for it.

Every generator takes (rng, reps, n) and returns a (reps, n) float array, or, for the gaps case,
a list of per-series lists with None for the missing values. Series of one (scenario, n) come from
one seed (:func:`seed_for`), so the same series are judged with and without timestamps and at each
confidence (paired comparisons). Innovations are standard normal unless a scenario says otherwise.
"""
from __future__ import annotations

import zlib
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from scipy.signal import lfilter

#: Root of every seed; a run is reproduced by the same code, this seed and the same library versions.
BASE_SEED = 20_261_205

IID_NS = (20, 50, 100, 300, 1000, 5000)
MECHANISM_NS = (100, 300, 1000)
SHORT_NS = (20, 30)
PERIOD = 12  # the seasonal AR's period, sent as the request option `period`
BURN_IN = 500  # values dropped at the start of recursive processes, so they start from their stationary law


def seed_for(scenario: str, n: int) -> np.random.SeedSequence:
    """One seed per (scenario, n); crc32 is stable across runs, unlike Python's salted hash()."""
    return np.random.SeedSequence([BASE_SEED, zlib.crc32(scenario.encode()), n])


def rng_for(scenario: str, n: int) -> np.random.Generator:
    return np.random.default_rng(seed_for(scenario, n))


# --- i.i.d. families -------------------------------------------------------------------------------

def iid_normal(rng, reps, n):
    """i.i.d. standard normal."""
    return rng.standard_normal((reps, n))


def iid_t3(rng, reps, n):
    """Student t with 3 degrees of freedom: heavy tails (finite variance, infinite fourth moment)."""
    return rng.standard_t(3, (reps, n))


def iid_skewed(rng, reps, n):
    """Centred exponential (mean 0, variance 1, skewness 2)."""
    return rng.exponential(1.0, (reps, n)) - 1.0


def iid_uniform(rng, reps, n):
    """i.i.d. uniform on (-1, 1)."""
    return rng.uniform(-1.0, 1.0, (reps, n))


# --- linear dependence ---------------------------------------------------------------------------

def ar1(phi: float) -> Callable:
    def generate(rng, reps, n):
        e = rng.standard_normal((reps, n + BURN_IN))
        return lfilter([1.0], [1.0, -phi], e, axis=1)[:, BURN_IN:]
    generate.__doc__ = f"AR(1): x_t = {phi} x_(t-1) + e_t."
    return generate


def forecast_errors(phi: float, h: int) -> Callable:
    def generate(rng, reps, n):
        e = rng.standard_normal((reps, n + h - 1))
        return lfilter(phi ** np.arange(h), [1.0], e, axis=1)[:, h - 1:]
    generate.__doc__ = (f"Errors of the optimal {h}-step forecasts of an AR(1) with phi {phi}: "
                        f"sum_(j<{h}) {phi}^j e_(t+{h}-j), an MA({h - 1}); sent with horizon {h}.")
    return generate


def wrong_forecast(phi: float, used: float, h: int) -> Callable:
    def generate(rng, reps, n):
        e = rng.standard_normal((reps, n + h + BURN_IN))
        x = lfilter([1.0], [1.0, -phi], e, axis=1)[:, BURN_IN:]
        return x[:, h:] - used ** h * x[:, :-h]
    generate.__doc__ = (f"Errors of {h}-step forecasts of an AR(1) with phi {phi} made with phi {used} (a wrong "
                        f"model): x_(t+{h}) - {used}^{h} x_t; sent with horizon {h}.")
    return generate


def ma1(theta: float) -> Callable:
    def generate(rng, reps, n):
        e = rng.standard_normal((reps, n + 1))
        return e[:, 1:] + theta * e[:, :-1]
    generate.__doc__ = f"MA(1): x_t = e_t + {theta} e_(t-1)."
    return generate


def seasonal_ar(rng, reps, n):
    """x_t = 0.5 x_(t-12) + e_t."""
    a = np.zeros(PERIOD + 1)
    a[0], a[PERIOD] = 1.0, -0.5
    e = rng.standard_normal((reps, n + BURN_IN))
    return lfilter([1.0], a, e, axis=1)[:, BURN_IN:]


# --- mechanisms that are not a stationary linear dependence -----------------------------------

def linear_trend(rng, reps, n):
    """3 t / (n - 1) + e_t: the trend rises by 3 noise standard deviations over the series."""
    return 3.0 * np.linspace(0.0, 1.0, n) + rng.standard_normal((reps, n))


def random_walk(rng, reps, n):
    """Random walk: x_t = x_(t-1) + e_t."""
    return np.cumsum(rng.standard_normal((reps, n)), axis=1)


def over_differenced(rng, reps, n):
    """First difference of i.i.d. noise: an MA(1) with theta = -1 (r_1 near -0.5)."""
    return np.diff(rng.standard_normal((reps, n + 1)), axis=1)


def garch11(rng, reps, n, omega=0.1, alpha=0.15, beta=0.8):
    """GARCH(1,1) with normal innovations: no autocorrelation, variance that clusters."""
    sigma2 = np.full(reps, omega / (1.0 - alpha - beta))  # the unconditional variance as the start
    x = np.empty((reps, n))
    e = rng.standard_normal((reps, n + BURN_IN))
    prev = np.zeros(reps)
    for t in range(n + BURN_IN):
        sigma2 = omega + alpha * prev**2 + beta * sigma2
        prev = np.sqrt(sigma2) * e[:, t]
        if t >= BURN_IN:
            x[:, t - BURN_IN] = prev
    return x


def one_outlier(rng, reps, n):
    """AR(1) phi = 0.5 with one value, at a random place, moved by 25 innovation standard deviations
    (up or down at random)."""
    x = ar1(0.5)(rng, reps, n)
    where = rng.integers(0, n, reps)
    sign = rng.choice([-1.0, 1.0], reps)
    x[np.arange(reps), where] += 25.0 * sign
    return x


def gaps_40(rng, reps, n):
    """i.i.d. normal with 40% of the values (chosen at random) sent as null."""
    x = rng.standard_normal((reps, n))
    holes = np.argsort(rng.random((reps, n)), axis=1)[:, : round(0.4 * n)]
    out = []
    for row, gone in zip(x.tolist(), holes):
        for i in gone:
            row[i] = None
        out.append(row)
    return out


@dataclass(frozen=True)
class Scenario:
    name: str
    generate: Callable
    white_noise: bool  # the verdict expected
    structure: str | None  # the structure kind expected in verdict.structure (None: no structure at all)
    advice: str  # the code expected on the first advice item
    family: str  # "iid" (the false-alarm targets), "white" (white noise, other targets), "mechanism" or "horizon"
    ns: tuple[int, ...]
    options: dict = field(default_factory=dict)  # request options sent with every series
    timestamps: bool = False  # also run each n with daily timestamps

    @property
    def description(self) -> str:
        return " ".join((self.generate.__doc__ or self.name).split()).rstrip(".")


NOTHING = "nothing_to_model"

SCENARIOS: dict[str, Scenario] = {s.name: s for s in [
    Scenario("iid_normal", iid_normal, True, None, NOTHING, "iid", IID_NS, timestamps=True),
    Scenario("iid_t3", iid_t3, True, None, NOTHING, "iid", IID_NS, timestamps=True),
    Scenario("iid_skewed", iid_skewed, True, None, NOTHING, "iid", IID_NS, timestamps=True),
    Scenario("iid_uniform", iid_uniform, True, None, NOTHING, "iid", IID_NS, timestamps=True),
    Scenario("short", iid_normal, True, None, NOTHING, "iid", SHORT_NS),
    Scenario("ar1_0.3", ar1(0.3), False, "autocorrelation", "add_ar_terms", "mechanism", MECHANISM_NS),
    Scenario("ar1_0.5", ar1(0.5), False, "autocorrelation", "add_ar_terms", "mechanism", MECHANISM_NS),
    Scenario("ma1_0.4", ma1(0.4), False, "autocorrelation", "add_ma_terms", "mechanism", MECHANISM_NS),
    Scenario("seasonal_ar", seasonal_ar, False, "seasonal", "add_seasonal_terms", "mechanism", MECHANISM_NS,
             options={"period": PERIOD}),
    Scenario("trend", linear_trend, False, "trend", "remove_trend", "mechanism", MECHANISM_NS),
    Scenario("random_walk", random_walk, False, "unit_root", "difference", "mechanism", MECHANISM_NS),
    Scenario("over_differenced", over_differenced, False, "over_differenced", "undo_difference", "mechanism",
             MECHANISM_NS),
    Scenario("garch", garch11, True, "volatility_clustering", "model_variance", "white", MECHANISM_NS),
    Scenario("outlier", one_outlier, False, "outliers", "check_outliers", "mechanism", MECHANISM_NS),
    Scenario("gaps_40", gaps_40, True, None, NOTHING, "white", MECHANISM_NS, options={"missing": "interpolate"}),
    Scenario("forecast_h3", forecast_errors(0.8, 3), True, None, NOTHING, "horizon", MECHANISM_NS,
             options={"horizon": 3}),
    Scenario("forecast_h6", forecast_errors(0.8, 6), True, None, NOTHING, "horizon", MECHANISM_NS,
             options={"horizon": 6}),
    Scenario("wrong_forecast_h3", wrong_forecast(0.8, 0.4, 3), False, "autocorrelation", "add_arma_terms", "horizon",
             MECHANISM_NS, options={"horizon": 3}),
]}

#: Scenarios whose verdict is compared with a single Ljung-Box test at lag 10 (power).
POWER_SCENARIOS = ("ar1_0.3", "ma1_0.4")
POWER_NS = (100, 300)


def generate(scenario: Scenario, reps: int, n: int):
    """The (reps, n) series of a scenario at length n, from its own seed."""
    return scenario.generate(rng_for(scenario.name, n), reps, n)
