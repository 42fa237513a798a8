"""The answer of POST /v1/model-check: the fitted model, the search that chose it, the residuals' report
and the before/after comparison. Every key is always present; what does not apply is null."""
from __future__ import annotations

import math

from lagsight.consult import model_check as reading
from lagsight.engine.arima import Fitted, Order, term
from lagsight.engine.arima_search import Search

STOPPED = {
    "no_improvement": "no neighbour of the best order lowered the AICc",
    "fit_limit": "the limit on fits per request was reached",
    "budget": "the next fit would have passed the work budget of one request",
}


def _number(x) -> float | None:
    return float(x) if x is not None and math.isfinite(x) else None


def order_block(order: Order) -> dict:
    return {"label": order.label(), "order": [order.p, order.d, order.q],
            "seasonal_order": [order.P, order.D, order.Q, order.s] if order.seasonal else None,
            "trend": order.trend_name}


def model_block(fitted: Fitted, chosen_by: str) -> dict:
    parameters = []
    for name, estimate, se in zip(fitted.names, fitted.estimates.tolist(), fitted.standard_errors.tolist()):
        kind, lag = term(name)
        parameters.append({"term": kind, "lag": lag, "estimate": estimate, "standard_error": _number(se)})
    return {
        **order_block(fitted.order),
        "chosen_by": chosen_by,
        "arma_terms": fitted.order.arma_terms,
        "parameters": parameters,
        "log_likelihood": fitted.loglik,
        "aic": fitted.aic,
        "aicc": fitted.aicc,
        "bic": fitted.bic,
        "n_used": fitted.nobs,
        "residuals_dropped": fitted.burn,
        "converged": fitted.converged,
        "iterations": fitted.iterations,
        "notes": reading.notes(fitted.notices),
    }


def search_block(found: Search, max_fits: int, budget: int) -> dict:
    tried = [{**order_block(t.order),
              "aicc": t.fitted.aicc if t.fitted is not None else None,
              "converged": t.fitted.converged if t.fitted is not None else None,
              "failure": t.failure} for t in found.tried]
    return {"start": order_block(found.start), "tried": tried,
            "chosen": found.best.order.label() if found.best is not None else None,
            "stopped": found.stopped, "stopped_because": STOPPED[found.stopped],
            "fits": len(found.tried), "max_fits": max_fits, "work": found.spent, "work_budget": budget}


def answer(name, fitted: Fitted, found: Search | None, residuals: dict, before: dict, max_fits: int,
           budget: int) -> dict:
    label = fitted.order.label()
    return {
        "name": name,
        "model": model_block(fitted, "search" if found is not None else "request"),
        "search": search_block(found, max_fits, budget) if found is not None else None,
        "residuals": residuals,
        "comparison": reading.comparison(before, residuals, label),
        "cautions": reading.cautions(found is not None, fitted.order.arma_terms),
    }
