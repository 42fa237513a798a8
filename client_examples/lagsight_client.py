#!/usr/bin/env python3
"""Call the Lagsight service from Python with requests.

As a library::

    from lagsight_client import Lagsight, LagsightError
    api = Lagsight("http://127.0.0.1:8000", timeout=30)
    report = api.diagnose([1.2, -0.4, 0.3, -1.1, 0.8, 0.1, -0.6, 0.9], period=4)
    print(report["verdict"]["white_noise"], report["acf"]["outside"])

From the shell (PAYLOAD is a request body, for example a file from demo_payloads/)::

    python lagsight_client.py single demo_payloads/bakery_daily_residuals.json
    python lagsight_client.py batch  demo_payloads/retail_weekly_batch_500.json
    python lagsight_client.py model-check demo_payloads/dairy_daily_milk_intake_model_check.json
    python lagsight_client.py stability demo_payloads/bus_line_daily_boardings_stability.json
    python lagsight_client.py driver-check demo_payloads/district_heating_daily_demand_drivers.json

Settings come from the environment: LAGSIGHT_URL (default http://127.0.0.1:8000),
LAGSIGHT_TIMEOUT in seconds (default 30) and LAGSIGHT_TOKEN (a bearer token, only
for deployments that require one). Exit codes: 0 answered, 2 the service refused the
request (its problem details are printed), 3 no answer (network error or timeout).
"""
from __future__ import annotations

import json
import os
import sys

import requests

#: Mode on the command line -> route.
ROUTES = {"single": "/v1/diagnostics", "batch": "/v1/diagnostics/batch", "model-check": "/v1/model-check",
          "stability": "/v1/stability", "driver-check": "/v1/driver-check"}


class LagsightError(Exception):
    """The service answered with an error: ``problem`` holds its problem details (RFC 9457)."""

    def __init__(self, problem: dict):
        self.problem = problem
        self.status = problem.get("status")
        super().__init__(f"{self.status} {problem.get('title')}: {problem.get('detail')}")


class Lagsight:
    def __init__(self, base_url: str = "http://127.0.0.1:8000", timeout: float = 30.0, token: str | None = None):
        self.base_url = base_url.rstrip("/")
        self.timeout = timeout  # seconds; requests has no default timeout, so always pass one
        self.session = requests.Session()
        self.session.headers["Accept"] = "application/json"
        if token:
            self.session.headers["Authorization"] = f"Bearer {token}"

    def _post(self, path: str, body: dict) -> dict:
        r = self.session.post(self.base_url + path, json=body, timeout=self.timeout)
        if r.headers.get("Content-Type", "").startswith("application/problem+json"):
            raise LagsightError(r.json())
        if not r.ok:  # an error from something in between (a proxy), not in the problem shape
            raise LagsightError({"status": r.status_code, "title": r.reason, "detail": r.text[:200]})
        return r.json()

    def diagnose(self, values, **options) -> dict:
        """One series: ``values`` (None = missing) and options such as period, max_lag, model_df, confidence."""
        return self._post("/v1/diagnostics", {"values": list(values), **options})

    def diagnose_batch(self, series: list[dict], **options) -> dict:
        """Many series: each ``{"id": ..., "values": [...]}``; options are shared (a series may override them)."""
        return self._post("/v1/diagnostics/batch", {"series": series, **options})

    def model_check(self, values, order="suggested", **options) -> dict:
        """Fit a model (``order`` [p, d, q] or "suggested") and diagnose its residuals."""
        return self._post("/v1/model-check", {"values": list(values), "order": order, **options})

    def stability(self, values, window: int, **options) -> dict:
        """Diagnose every window of ``window`` values (``step`` apart) and read when the structure changed."""
        return self._post("/v1/stability", {"values": list(values), "window": window, **options})

    def driver_check(self, values, drivers: list[dict], **options) -> dict:
        """Is each driver (``{"name": ..., "values": [...], "timestamps": [...]}``) still linked to the series?"""
        return self._post("/v1/driver-check", {"values": list(values), "drivers": drivers, **options})

    def send(self, mode: str, body: dict) -> dict:
        return self._post(ROUTES[mode], body)



def verdict_word(white_noise) -> str:
    return {True: "white noise", False: "not white noise"}.get(white_noise, "no judgement")


def lag_list(lags: list[int]) -> str:
    return ", ".join(str(k) for k in lags) if lags else "none"


def print_report(report: dict) -> None:
    print(report.get("name") or "(unnamed)")
    print(f"verdict: {verdict_word(report['verdict']['white_noise'])}")
    print(f"summary: {report['verdict']['summary']}")
    print(f"outside the band (ACF): {lag_list(report['acf']['outside'])}")
    print(f"outside the band (PACF): {lag_list(report['pacf']['outside'])}")


def print_batch(answer: dict) -> None:
    for result in answer["results"]:
        if result.get("error"):
            print(f"{result['id']}: error {result['error']['status']}: {result['error']['detail']}")
        else:
            print(f"{result['id']}: {verdict_word(result['verdict']['white_noise'])}; "
                  f"ACF outside: {lag_list(result['acf']['outside'])}")
    s = answer["summary"]
    print(f"summary: {s['white_noise']} white noise, {s['not_white_noise']} not white noise, "
          f"{s['undetermined']} undetermined, {s['errors']} {'error' if s['errors'] == 1 else 'errors'}")


def print_model_check(answer: dict) -> None:
    c = answer["comparison"]
    print(answer.get("name") or "(unnamed)")
    print(f"model: {answer['model']['label']} (chosen by {answer['model']['chosen_by']})")
    print(f"before: {verdict_word(c['before']['white_noise'])}")
    print(f"residuals: {verdict_word(c['after']['white_noise'])}")
    print(c["sentence"])


def print_stability(answer: dict) -> None:
    n = answer["counts"]
    print(answer.get("name") or "(unnamed)")
    print(f"windows: {n['windows']} ({n['white_noise']} white noise, {n['not_white_noise']} not white noise, "
          f"{n['undetermined']} undetermined, {n['errors']} {'error' if n['errors'] == 1 else 'errors'})")
    found = answer["changes"]["found"]
    if found is None:
        print("changes: not computed")
    elif not found:
        print("changes: none found")
    for c in found or []:
        print(f"change: {c['kind']} at {c['time'] or 'index ' + str(c['index'])}, p = {c['p_value']}")


def print_driver_check(answer: dict) -> None:
    print(answer.get("name") or "(unnamed)")
    for d in answer["drivers"]:
        if d["moves_with_series"]:
            print(f"{d['name']}: linked at lags {', '.join(map(str, d['key_lags']))} ({d['direction']})")
        else:
            print(f"{d['name']}: no link found")


PRINTERS = {"single": print_report, "batch": print_batch, "model-check": print_model_check,
            "stability": print_stability, "driver-check": print_driver_check}


def main(argv: list[str]) -> int:
    if len(argv) != 2 or argv[0] not in ROUTES:
        print("usage: lagsight_client.py single|batch|model-check|stability|driver-check PAYLOAD.json",
              file=sys.stderr)
        return 64
    mode, path = argv
    with open(path, encoding="utf-8") as fh:
        body = json.load(fh)
    api = Lagsight(os.environ.get("LAGSIGHT_URL", "http://127.0.0.1:8000"),
                   float(os.environ.get("LAGSIGHT_TIMEOUT", "30")), os.environ.get("LAGSIGHT_TOKEN"))
    try:
        answer = api.send(mode, body)
    except LagsightError as err:
        p = err.problem
        print(f"error {p.get('status')} ({p.get('title')}): {p.get('detail')}", file=sys.stderr)
        for e in p.get("errors", []):
            print(f"  {e['pointer']}: {e['detail']}", file=sys.stderr)
        return 2
    except requests.Timeout:
        print(f"error: no answer from {api.base_url} within {api.timeout:g} s", file=sys.stderr)
        return 3
    except requests.RequestException as err:
        print(f"error: could not reach {api.base_url}: {err}", file=sys.stderr)
        return 3
    PRINTERS[mode](answer)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
