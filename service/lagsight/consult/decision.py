"""One decision per series: is it white noise, and if not, which mechanism; everything the reading says is
derived from it.

Decision rule (documented in /v1/methods, the README and the OpenAPI file)
--------------------------------------------------------------------------
Let alpha = 1 - confidence. Two channels of evidence share alpha
(weighted Bonferroni), so an i.i.d. series gets any named structure with probability at most alpha:

With ``horizon`` h > 1 (h-step forecast errors) every component below starts at lag h instead of lag 1 (lag h
alone, the sums over lags h.., the spikes over h..), with Bartlett's variance for lags >= h (``engine/horizon.py``).

1. autocorrelation, at level 0.9 alpha: the smallest p-value among the lag-1 autocorrelation, the Ljung-Box-type
   sums at the short lag h and at max_lag K, the largest spike over lags 1..h (Sidak-corrected), the largest
   seasonal spike (Sidak-corrected) and the rank autocorrelations, referred to its simulated null distribution (min-p adjustment, Westfall and Young
   1993). The autocorrelations are standardised with heteroskedasticity-consistent variances (Diebold 1986;
   Lobato, Nankervis and Savin 2001), so volatility alone is not called autocorrelation. ``white_noise`` is false
   exactly when this channel rejects.
2. volatility, at level 0.1 alpha: autocorrelation of the ranks of |x - mean|. Named ``volatility_clustering``
   only when the autocorrelation channel does not reject (the magnitudes of an autocorrelated series are
   autocorrelated too); the series is then uncorrelated but not independent, and ``white_noise`` stays true.

When the autocorrelation channel rejects, the mechanism is named from these checks, in this order:

- ``over_differenced``: r_1 <= -0.4 (a series differenced once too often has r_1 near -0.5; common practice,
  no source for the cut-off);
- ``trend``: r_1 >= 0.3, the least-squares slope has a Newey-West |t| >= 3, and what is left around the line is
  stationary: its lag-1 autocorrelation is at most 0.5, or the ADF test with constant and trend rejects a unit
  root at alpha while the KPSS test around a trend does not reject stationarity (a deterministic trend: remove
  it, do not difference);
- ``unit_root``: otherwise, the autocorrelation decays slowly (r_1 >= 0.7 and r_k > r_1 / 2 up to lag 6) and the
  ADF tests (with a constant; with constant and trend) do not both reject a unit root at alpha (difference);
- ``outliers``: isolated values beyond the median/MAD threshold, and the ordinary and rank autocorrelations
  disagree by more than 3 standard errors at some lag up to h (the reading depends on those values);
- ``seasonal``: the seasonal-spike component alone passes the channel's threshold;
- ``autocorrelation``: a component other than the seasonal spike passes it (with a period, the lags that are not
  multiples of it).
The runs, turning-point and cumulative-periodogram checks are information: they add ``non_random_order`` or
``uneven_spectrum`` only beside a rejection of the autocorrelation channel, never on their own.

Values that were filled (``missing: "interpolate"``) are left out of the evidence: the channels run on the
observed values with the amplitude-modulated estimator, so the straight lines drawn through gaps cannot create
the correlation the verdict rests on.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from lagsight import options
from lagsight.consult.words import below, fmt, fmt_p, plural
from lagsight.engine.channels import COMPONENTS, sidak
from lagsight.engine.mechanism import Mechanism
from lagsight.engine.whiteness import Evidence, raw_threshold

WEIGHT_AUTOCORRELATION = 0.9
WEIGHT_VOLATILITY = 0.1
OVER_DIFFERENCED_R1 = -0.4
PERSISTENT_R1 = 0.3
TREND_T = 3.0
TREND_RESIDUAL_R1 = 0.5
RANK_GAP_SE = 3.0
#: Structure kinds in the order of their importance for the advice.
KINDS = ("outliers", "over_differenced", "trend", "unit_root", "seasonal", "autocorrelation",
         "volatility_clustering", "non_random_order", "uneven_spectrum")


@dataclass
class Decision:
    """The one decision about a series; the verdict, sentences, advice and cautions are read off it."""

    n: int
    alpha: float
    white_noise: bool | None
    p_value: float  # the autocorrelation channel's adjusted p-value
    threshold: float  # its level, 0.9 alpha
    volatility_p: float
    volatility_threshold: float
    tail_p_value: float  # Bonferroni over the spike components: its far tail holds (for batch adjustment)
    structure: list[str]
    evidence: list[dict]
    strongest_lag: int
    strongest_r: float
    r1: float
    period: int | None
    max_lag: int = 1
    outliers: list[int] = field(default_factory=list)
    outlier_z: list[float] = field(default_factory=list)
    filled: int = 0
    tied_share: float = 0.0
    checks: dict = field(default_factory=dict)  # ADF p-values and the slope's t where computed
    horizon: int = 1  # h-step forecast errors: lags 1..horizon - 1 are not tested

    @property
    def mechanism(self) -> str | None:
        return self.structure[0] if self.structure else None

    def around_line(self) -> str:
        """The evidence that the values around a fitted line are stationary, in words (only what supports it)."""
        c = self.checks
        if c["residual_r1"] is None:
            return "the values lie on the line"
        if c["residual_r1"] <= TREND_RESIDUAL_R1:
            return f"their lag-1 autocorrelation around the line is {fmt(c['residual_r1'], 2)}"
        return (f"the augmented Dickey-Fuller test with a trend rejects a unit root, {fmt_p(c['adf_trend_p'])}, and the "
                "KPSS test does not reject stationarity around the trend")

    def slope_text(self) -> str:
        """The slope's evidence in words: its Newey-West t, or that the values lie on an exact line."""
        t = self.checks["slope_t"]
        return "the values lie on an exact line" if t is None else f"t = {fmt(t, 2)}, Newey-West"

    def unit_root_test(self) -> str:
        """The augmented Dickey-Fuller test that cannot rule out a unit root, with its p-value, in words."""
        c = self.checks
        if c["adf_p"] is not None and c["adf_p"] > self.alpha:
            return f"the augmented Dickey-Fuller test with a constant cannot rule out a unit root ({fmt_p(c['adf_p'])})"
        return (f"the augmented Dickey-Fuller test with a constant and a trend cannot rule out a unit root "
                f"({fmt_p(c['adf_trend_p'])})")

    def verdict(self) -> dict:
        """The report's ``verdict`` object."""
        if self.white_noise is False:
            confidence = "strong" if self.p_value < self.threshold / 10 else "moderate"
        elif self.white_noise is None:
            confidence = "none"
        else:
            confidence = "weak" if self.n < options.SMALL_SAMPLE_N or self.p_value < 4 * self.alpha else "moderate"
        return {"white_noise": self.white_noise, "summary": summary(self), "structure": list(self.structure),
                "confidence": confidence, "p_value": self.p_value, "threshold": self.threshold,
                "evidence": self.evidence,
                "volatility": {"p_value": self.volatility_p, "threshold": self.volatility_threshold,
                               "clustering": "volatility_clustering" in self.structure},
                "tail_p_value": self.tail_p_value, "filled_values_excluded": self.filled}


def _phrase(d: Decision) -> str:
    k = d.mechanism
    if k == "over_differenced":
        return (f"the lag-1 autocorrelation is {fmt(d.r1, 2)}, the mark of a series differenced once too often")
    if k == "trend":
        return "the level follows a steady trend"
    if k == "unit_root":
        return f"the level wanders, r1 = {fmt(d.r1, 2)}, and a unit root cannot be ruled out"
    if k == "outliers":
        one = len(d.outliers) == 1
        return (f"autocorrelation remains, and {'an extreme value' if one else plural(len(d.outliers), 'extreme value')}"
                f" {'hides or fakes' if one else 'hide or fake'} part of it")
    if k == "seasonal":
        return (f"autocorrelation at the seasonal lag {d.strongest_lag} of period {d.period}, where "
                f"r = {fmt(d.strongest_r, 2)}")
    return f"autocorrelation remains, strongest at lag {d.strongest_lag} where r = {fmt(d.strongest_r, 2)}"


def summary(d: Decision) -> str:
    """The headline: one sentence, derived from the decision only."""
    if d.white_noise is None:
        return (f"No judgement: model_df leaves no degrees of freedom at any portmanteau lag up to {d.max_lag}, and no "
                f"spike stands out; raise max_lag above {'model_df' if d.horizon == 1 else 'horizon - 1 + model_df'} "
                "or check model_df.")
    if d.white_noise is False:
        return f"Not white noise: {_phrase(d)} (adjusted {fmt_p(d.p_value)})."
    if "volatility_clustering" in d.structure:
        return (f"No significant autocorrelation, but large swings cluster in time (volatility {fmt_p(d.volatility_p)}): "
                "uncorrelated, yet not independent noise.")
    few = (f", but with only n = {d.n} values the checks have little power to find structure"
           if d.n < options.SMALL_SAMPLE_N else "")
    untested = (f"; {below(d.horizon)} {'is' if d.horizon == 2 else 'are'} not tested, as {d.horizon}-step forecast "
                "errors are correlated "
                "there by construction" if d.horizon > 1 else "")
    lags = f"lag {d.max_lag}" if d.horizon == d.max_lag else f"lags {d.horizon} to {d.max_lag}"
    return (f"Consistent with white noise: no autocorrelation stands out at {lags} "
            f"(adjusted {fmt_p(d.p_value)}){few}{untested}.")


def _rejects(analysis, name: str, alpha: float) -> np.ndarray:
    m = analysis.acf.shape[0]
    hit = np.zeros(m, dtype=bool)
    for t in analysis.tests:
        if t.name == name:
            with np.errstate(invalid="ignore"):
                hit |= (t.p_value < alpha).any(axis=1)
    return hit


def decide_block(analysis, ns: list[int], periods: list[int | None], filled: list[int]) -> list[Decision]:
    """The decision for every row of an engine block (``analysis.evidence`` and ``analysis.mechanism`` set)."""
    ev: Evidence = analysis.evidence
    mech: Mechanism = analysis.mechanism
    lay = ev.layout
    alpha = 1.0 - analysis.spec.confidence
    level_a, level_v = WEIGHT_AUTOCORRELATION * alpha, WEIGHT_VOLATILITY * alpha
    thresholds = {n: raw_threshold(n, lay, level_a) for n in np.unique(ev.simulated_n).tolist()}
    against_a = ev.p_autocorrelation < level_a
    against_v = ev.p_volatility < level_v
    order = _rejects(analysis, "runs", alpha) | _rejects(analysis, "turning_points", alpha)
    uneven = _rejects(analysis, "cumulative_periodogram", alpha)
    r = ev.r  # the autocorrelations the evidence rests on (observed values only when some were filled)
    # Without a portmanteau lag that has degrees of freedom left after model_df, only a rejection is read.
    judged = lay.max_lag - lay.horizon + 1 - analysis.spec.model_df > 0  # lags horizon..max_lag are tested
    lags = _component_lags(lay, ev.z, ev.z_rank)  # per component, every row's lag (None where it has none)
    strongest = _strongest_lags(lay, ev.z, ev.z_rank, ev.components, lags)
    components, simulated_n = ev.components.tolist(), ev.simulated_n.tolist()
    against_list = against_a.tolist()
    out = []
    for i in range(r.shape[0]):
        z, zr, comps = ev.z[i], ev.z_rank[i], ev.components[i]
        t_star = thresholds[int(simulated_n[i])]
        row, against = components[i], against_list[i]
        evidence = []
        for j, name in enumerate(COMPONENTS):
            p = row[j]
            if p >= 1.0 and name in ("ljung_box_long", "seasonal_spike"):
                continue
            evidence.append({"source": name, "lag": lags[j][i], "p_value": p, "threshold": t_star,
                             "against_white_noise": p <= t_star and against})
        k = strongest[i]
        structure: list[str] = []
        r1 = float(r[i, 0])
        if against_a[i]:
            structure = _mechanisms(i, z, zr, comps, t_star, r1, lay, periods[i], mech, alpha)
            structure += [kind for kind, hit in (("non_random_order", order[i]), ("uneven_spectrum", uneven[i])) if hit]
        elif against_v[i]:
            structure = ["volatility_clustering"]
        d = Decision(
            n=ns[i], alpha=alpha, white_noise=False if against_a[i] else (True if judged else None), p_value=float(ev.p_autocorrelation[i]),
            threshold=level_a, volatility_p=float(ev.p_volatility[i]), volatility_threshold=level_v,
            tail_p_value=float(ev.p_tail[i]), structure=structure, evidence=evidence, strongest_lag=k,
            strongest_r=float(r[i, k - 1]), r1=r1, period=periods[i], max_lag=lay.max_lag, outliers=mech.outliers[i],
            outlier_z=mech.outlier_z[i], filled=filled[i], tied_share=float(ev.tied_share[i]),
            checks={"adf_p": _num(mech.adf_p[i]), "adf_trend_p": _num(mech.adf_trend_p[i]),
                    "slope_t": _num(mech.slope_t[i]), "residual_r1": _num(mech.resid_r1[i])}, horizon=lay.horizon)
        out.append(d)
    return out


def _component_lags(lay, z: np.ndarray, zr: np.ndarray) -> list[list]:
    """Per component (in COMPONENTS order), every row's lag, over the block at once: the first tested lag (the horizon) for lag_one, the short lag
    for the short sums, max_lag for the long one, the lag of the largest |z| over the short lags for spike (of
    the rank autocorrelations for rank_spike) and over the seasonal lags for seasonal_spike (None without one)."""
    m = z.shape[0]
    spike = (np.argmax(np.abs(z[:, :lay.short]), axis=1) + 1).tolist()
    rank_spike = (np.argmax(np.abs(zr[:, :lay.short]), axis=1) + 1).tolist()
    if lay.seasonal:
        at = np.asarray(lay.seasonal)
        seasonal = at[np.argmax(np.abs(z[:, at - 1]), axis=1)].tolist()
    else:
        seasonal = [None] * m
    by_name = {"lag_one": [lay.horizon] * m, "ljung_box_short": [lay.short] * m, "ljung_box_long": [lay.max_lag] * m,
               "spike": spike, "seasonal_spike": seasonal, "rank_ljung_box": [lay.short] * m, "rank_spike": rank_spike}
    return [by_name[name] for name in COMPONENTS]


def _strongest_lags(lay, z: np.ndarray, zr: np.ndarray, comps: np.ndarray, lags: list[list]) -> list[int]:
    """The lag the strongest evidence of each row points to: that of the component with the smallest p-value (the
    rank autocorrelations' own lag when a rank component wins; the largest robust spike over every lag for the
    long sum, over the short lags for the other sums)."""
    winner = np.argmin(comps, axis=1).tolist()
    spike = lags[COMPONENTS.index("spike")]
    rank_spike = lags[COMPONENTS.index("rank_spike")]
    seasonal = lags[COMPONENTS.index("seasonal_spike")]
    widest = (np.argmax(np.abs(z), axis=1) + 1).tolist()
    out = []
    for i, w in enumerate(winner):
        name = COMPONENTS[w]
        out.append(seasonal[i] if name == "seasonal_spike" else rank_spike[i] if name.startswith("rank")
                   else widest[i] if name == "ljung_box_long" else spike[i])
    return out


def _num(v: float) -> float | None:
    return None if not np.isfinite(v) else float(v)


def _mechanisms(i, z, zr, comps, t_star, r1, lay, period, mech: Mechanism, alpha) -> list[str]:
    kinds = []
    h = lay.short
    if mech.outliers[i] and np.max(np.abs(z[:h] - zr[:h])) > RANK_GAP_SE:
        kinds.append("outliers")
    adf_p, adf_trend_p, slope_t = mech.adf_p[i], mech.adf_trend_p[i], mech.slope_t[i]
    if r1 <= OVER_DIFFERENCED_R1:
        kinds.append("over_differenced")
    elif r1 >= PERSISTENT_R1 and np.isfinite(adf_trend_p):
        resid_r1 = mech.resid_r1[i]
        stationary_around_line = (not np.isfinite(resid_r1) or resid_r1 <= TREND_RESIDUAL_R1  # an exact line: nothing left
                                  or (adf_trend_p <= alpha and mech.kpss_trend_p[i] > alpha))
        if not abs(slope_t) < TREND_T and stationary_around_line:
            kinds.append("trend")
        elif mech.slow[i] and not (adf_p <= alpha and adf_trend_p <= alpha):
            kinds.append("unit_root")
    seasonal = bool(lay.seasonal) and comps[4] <= t_star
    if seasonal and "over_differenced" not in kinds:
        kinds.append("seasonal")
    if period and seasonal:
        lags = [k for k in range(lay.horizon, h + 1) if k % period]
        other = min(sidak(np.abs(z[np.asarray(lags) - 1]).max(), len(lags)), comps[0]) if lags else 1.0
        short_term = other <= t_star
    else:
        short_term = bool((np.delete(comps, 4) <= t_star).any())
    if short_term or not kinds:
        kinds.append("autocorrelation")
    return sorted(kinds, key=KINDS.index)
