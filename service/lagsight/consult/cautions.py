"""The cautions a report carries: those that always apply, and those its numbers call for."""
from __future__ import annotations

from lagsight import options
from lagsight.consult.decision import Decision
from lagsight.consult.words import and_, below, fmt, pct, plural


def short_series_warning(n: int) -> dict:
    return {"code": "short_series", "message": (
        f"n = {n} is below {options.SMALL_SAMPLE_N}: the individual tests' chi-square p-values are approximate (at "
        "n = 30 the 5% Ljung-Box test rejects about 7% of pure-noise series); the verdict uses a simulated reference "
        "that holds at this length; for the individual tests consider p_values \"monte_carlo\".")}


#: From this share of values equal to the most common one on, a caution says the reference is approximate.
TIED_SHARE = 0.5


def cautions(report: dict, decision: Decision) -> list[str]:
    """The cautions that always apply, and those this report calls for."""
    ex = report["exceedances"]
    out = [
        "A test that does not reject is not proof of white noise: it only says this sample gives no strong "
        "evidence of structure at the lags checked.",
        f"With {plural(ex['lags_tested'], 'lag')} tested, about {fmt(ex['expected'], 2)} of the autocorrelations are "
        f"expected outside the {pct(report['band']['per_lag_confidence'])} band drawn, by chance alone; judge single spikes with that "
        "in mind. The verdict adjusts for the number of lags and checks; the per-test reject flags do not.",
    ]
    if decision.filled:
        out.append(f"{plural(decision.filled, 'value')} of this series {'was' if decision.filled == 1 else 'were'} "
                   f"filled by interpolation. The verdict leaves {'it' if decision.filled == 1 else 'them'} out (it "
                   "uses the observed values only); the correlograms and tests shown include "
                   f"{'it' if decision.filled == 1 else 'them'}, and straight lines drawn through gaps make "
                   "neighbouring values look correlated.")
    if decision.outliers:
        where = and_([str(i) for i in decision.outliers[:8]]) + (" ..." if len(decision.outliers) > 8 else "")
        out.append(f"{plural(len(decision.outliers), 'value')} at {'index' if len(decision.outliers) == 1 else 'indices'} "
                   f"{where} (counted from 0 in the series analysed, after any transform) "
                   f"{'lies' if len(decision.outliers) == 1 else 'lie'} far from the rest (median/MAD rule); "
                   "a single extreme value can hide or fake autocorrelation.")
    if report["missing"]["method"] == "pairwise" and report["missing"]["remaining"]:
        out.append("With missing values kept missing (pairwise), the checks for a trend, a unit root and isolated "
                   "extreme values were not made: they need a complete series (missing \"interpolate\" makes one).")
    if decision.tied_share >= TIED_SHARE:
        out.append(f"{pct(decision.tied_share)} of the values share one value (for example zero sales): the verdict's "
                   "reference assumes values that vary continuously, and with mostly equal values it can flag "
                   "structure more often than its level says; read a rejection resting on a few non-zero values "
                   "with care.")
    if report["model_df"] == 0:
        out.append("If these values are residuals of a fitted ARMA model, set model_df to its number of "
                   "estimated parameters (p + q); otherwise the portmanteau p-values are too large.")
    elif report["p_values"]["method"] == "monte_carlo":
        out.append("Monte Carlo p-values simulate an i.i.d. series of the same length; they do not reflect the "
                   f"estimation of the model's {report['model_df']} parameters, so they err on the large side.")
    if report.get("horizon", 1) > 1:
        h = report["horizon"]
        out.append(f"These values are read as {h}-step-ahead forecast errors: {below(h)} {'is' if h == 2 else 'are'} "
                   "not tested (such errors are correlated there by construction, even from the best forecast), so "
                   f"structure there goes unseen; the band and tests from lag {h} on use Bartlett's variance with the "
                   f"autocorrelations at {below(h)} as estimated, an approximation that is rough for short series. "
                   "The runs, turning-point and cumulative-periodogram checks look at every lag, so they often reject "
                   "such errors; they do not enter the verdict." + (f" model_df = {report['model_df']} is subtracted from the degrees of freedom of the "
                                f"sums from lag {h} on, as for one-step residuals; for h-step errors that is a "
                                "convention, not a derived result." if report["model_df"] else ""))
    if report["n"] < options.SMALL_SAMPLE_N:
        out.append(f"The series is short (n = {report['n']}): the bands are large-sample approximations and only "
                   "rough here, and the tests have little power to detect weak structure.")
    return out


def batch_cautions(analysed: int, chance_flags: float, any_without_model_df: bool, single: bool = False,
                   horizons=()) -> list[str]:
    """The general cautions of a brief batch answer, said once for all its series.

    ``chance_flags`` is the sum of 1 - confidence over the series analysed: the verdict rule
    holds each pure-noise series' chance of being called "not white noise" at or below its
    1 - confidence, so about that many could be flagged by chance if all were white noise.
    ``single``: the brief answer of one series, whose multiple-testing caution speaks of its own checks.
    ``horizons``: the series' horizons; above 1 the values are h-step forecast errors, said once here as the full
    report says it per series.
    """
    out = [
        "A white-noise verdict is not proof of white noise: it says only that the sample gives no strong "
        "evidence of autocorrelation at the lags checked.",
        f"Bands and p-values are large-sample (asymptotic) approximations, rough for short series (below n = "
        f"{options.SMALL_SAMPLE_N} a result with asymptotic p-values carries a short_series warning); p_values "
        "\"monte_carlo\" gives p-values that hold at any length.",
        "Multiple testing: the verdict adjusts for the many lags and tests of this series (the per-test reject "
        "flags do not)." if single else
        "Multiple testing: each verdict adjusts for the many lags and tests of its own series (the per-test reject "
        "flags do not), not for the other series. Of the "
        f"{analysed} series analysed here, up to about {_count(chance_flags)} could be called not white noise by chance "
        "alone at the chosen confidence even if every one were white noise; summary.false_discovery says which "
        "series stand out once that is allowed for (Benjamini-Hochberg).",
    ]
    if any_without_model_df:
        out.append("If these values are residuals of fitted ARMA models, set model_df to each model's number of "
                   "estimated parameters (p + q); otherwise the portmanteau p-values are too large.")
    ahead = sorted(h for h in set(horizons) if h > 1)
    if ahead:
        which = f"{ahead[0]}-step" if len(ahead) == 1 else "h-step"
        out.append(f"Values sent with a horizon above 1 are read as {which} forecast errors: the lags below the "
                   "horizon are not tested (such errors are correlated there by construction), so structure there "
                   "goes unseen. The runs, turning-point and cumulative-periodogram checks look at every lag, so they "
                   "often reject such errors; they do not enter the verdict.")
    return out


def _count(expected: float) -> str:
    """An expected count for a sentence: whole above 10, one decimal below."""
    return f"{expected:.0f}" if expected >= 10 else fmt(expected, 2)
