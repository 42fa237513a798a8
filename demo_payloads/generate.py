"""Write the demo payloads and their sidecars: invented scenarios, simulated with fixed seeds.

Run from the repository root::

    python demo_payloads/generate.py          # rewrite every payload and sidecar
    python demo_payloads/generate.py --check  # exit 1 if a committed file differs

Every scenario is invented (a regional bakery chain, a water utility, a call centre...);
no value comes from a real organisation or from teaching material. Each payload
``NAME.json`` (or ``NAME.csv``) has a sidecar ``NAME.expect.json`` that says how to send
it, what Lagsight should conclude and why. ``tests/test_demo_payloads.py`` sends every
payload to the service and checks the ``expect`` block.

Expectation keys (all optional) read by the test:

- ``white_noise``: the verdict's ``white_noise`` (true / false / null).
- ``acf_outside_includes``: lags that must be outside the ACF band.
- ``acf_outside_at_most``: the largest number of ACF lags allowed outside the band.
- ``pacf_outside_includes``: lags that must be outside the PACF band.
- ``seasonal_outside``: the seasonal lags (multiples of the period) that must be flagged.
- ``seasonal_inside``: seasonal lags that must not be flagged.
- ``period`` / ``period_source``: the period used and where it came from.
- ``n`` / ``n_missing_at_least``: usable points; missing points reported.
- ``ljung_box_rejects_at_max_lag``: the Ljung-Box result at max_lag.
- ``test_rejects``: {test name: true}: some lag of that test rejects.
- ``cautions_mention``: words that some caution must contain (case-insensitive).
- ``batch``: expectations for a batch (see the retail scenario).
- ``model_check``: expectations for POST /v1/model-check: ``model`` (the fitted model's label),
  ``before_white_noise``, ``residuals_white_noise``, ``structure_removed`` (see the dairy scenario).
- ``stability``: expectations for POST /v1/stability: ``structure_change_near`` and ``within`` (a
  structure change reported that close to that index), ``first_window_white_noise``,
  ``last_window_white_noise`` (see the bus operator scenario).
- ``driver_check``: expectations for POST /v1/driver-check: ``linked`` ({driver name: lags that must be
  among its key lags}), ``not_linked`` (driver names judged not linked) (see the district heating scenario).
"""
from __future__ import annotations

import argparse
import json
import sys
from datetime import date, datetime, timedelta
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent


def ar1(rng: np.random.Generator, n: int, phi: float, scale: float = 1.0, burn: int = 200) -> np.ndarray:
    """A stationary AR(1) path x_t = phi x_{t-1} + e_t with e_t ~ N(0, scale^2)."""
    e = rng.normal(0.0, scale, n + burn)
    x = np.empty(n + burn)
    x[0] = e[0]
    for t in range(1, n + burn):
        x[t] = phi * x[t - 1] + e[t]
    return x[burn:]


def garch11(rng: np.random.Generator, n: int, omega: float, alpha: float, beta: float, burn: int = 500) -> np.ndarray:
    """GARCH(1,1) returns: uncorrelated levels whose variance clusters in bursts."""
    z = rng.standard_normal(n + burn)
    x = np.empty(n + burn)
    var = omega / (1.0 - alpha - beta)
    for t in range(n + burn):
        x[t] = np.sqrt(var) * z[t]
        var = omega + alpha * x[t] ** 2 + beta * var
    return x[burn:]


def rounded(x: np.ndarray, decimals: int) -> list[float]:
    return [round(float(v), decimals) for v in x]


def monthly_stamps(start: date, n: int) -> list[str]:
    out, y, m = [], start.year, start.month
    for _ in range(n):
        out.append(f"{y:04d}-{m:02d}-01")
        m += 1
        if m == 13:
            y, m = y + 1, 1
    return out


# ---------------------------------------------------------------------------------------------- scenarios
# Each returns (payload, sidecar). The payload is a dict (sent as JSON) or a str (sent as CSV text).
# Seeds are fixed. For the scenarios meant to show clean residuals (bakery, farm shop, cold store)
# and the volatility scenario, the seed was chosen among the first few so that the sample shows no
# chance spike at the lags the sidecar checks: a demo of "what white noise looks like" should look so.


def bakery_daily_residuals():
    rng = np.random.default_rng(3)
    values = rounded(rng.normal(0.0, 14.0, 56), 1)
    payload = {"name": "bakery chain, north depot: daily loaves, forecast residuals",
               "values": values, "period": 7, "model_df": 2}
    return payload, {
        "scenario": "A regional bakery chain forecasts daily loaves per depot with a model of two fitted "
                    "parameters; these are 8 weeks of its residuals (forecast minus sold) for the north depot.",
        "expect": {"n": 56, "period": 7, "white_noise": True, "acf_outside_at_most": 0, "seasonal_inside": [7, 14],
                   "cautions_mention": ["not proof"]},
        "why": "The residuals were simulated as independent normal draws (sd 14 loaves): nothing is left to "
               "model, so no lag, seasonal or not, should stand out and the portmanteau tests should not reject.",
    }


def water_utility_monthly_pump_energy():
    rng = np.random.default_rng(1907)
    n = 96
    month = np.arange(n) % 12
    seasonal = 55.0 * np.cos(2 * np.pi * (month - 6) / 12)  # peak in July, irrigation season
    values = rounded(420.0 + seasonal + ar1(rng, n, 0.4, 12.0), 1)
    payload = {"name": "water utility, east pumping station: monthly energy (MWh)",
               "values": values, "timestamps": monthly_stamps(date(2017, 1, 1), n)}
    return payload, {
        "scenario": "A water utility's east pumping station: eight years of monthly pump energy in MWh, sent "
                    "raw (no model) with month-start timestamps and no period.",
        "expect": {"n": 96, "period": 12, "period_source": "timestamps", "white_noise": False,
                   "acf_outside_includes": [1, 12], "seasonal_outside": [12, 24]},
        "why": "Demand peaks every summer (a 55 MWh yearly cycle) on top of mildly persistent noise: the monthly "
               "timestamps imply period 12, the autocorrelation is large and positive at lags 12 and 24 and the "
               "series is far from white noise. Advice should point at the seasonal structure.",
    }


def call_centre_hourly_wait_residuals():
    rng = np.random.default_rng(31337)
    n = 21 * 24
    values = rounded(ar1(rng, n, 0.5, 9.0), 2)
    payload = {"name": "call centre, claims line: hourly mean wait (s), model residuals",
               "values": values, "period": 24, "model_df": 3}
    return payload, {
        "scenario": "An insurer's call centre models hourly mean wait time on the claims line with a daily "
                    "profile and three fitted parameters; these are three weeks of hourly residuals in seconds.",
        "expect": {"n": 504, "period": 24, "white_noise": False, "acf_outside_includes": [1, 2],
                   "pacf_outside_includes": [1], "seasonal_inside": [24]},
        "why": "The model ignores that a long queue in one hour spills into the next: the residuals were "
               "simulated as AR(1) with coefficient 0.5, so the autocorrelation decays geometrically from "
               "about 0.5 at lag 1, the partial autocorrelation cuts off after lag 1, and the daily lag 24 is "
               "unremarkable.",
    }


def ice_cream_kiosk_daily_residuals():
    rng = np.random.default_rng(4242)
    n = 140
    weekday = (np.arange(n) + 2) % 7  # day 0 is a Wednesday; 5, 6 = Saturday, Sunday
    weekend = np.where(weekday >= 5, 18.0, -7.2)
    values = rounded(weekend + rng.normal(0.0, 12.0, n), 1)
    payload = {"name": "seafront ice-cream kiosk: daily cones sold, forecast residuals",
               "values": values, "period": 7, "model_df": 1}
    return payload, {
        "scenario": "A seafront ice-cream kiosk forecasts daily cones with a model (one fitted parameter) that "
                    "has no day-of-week term; 20 weeks of its residuals.",
        "expect": {"n": 140, "period": 7, "white_noise": False, "acf_outside_includes": [7, 14],
                   "seasonal_outside": [7, 14]},
        "why": "Weekends sell about 25 cones more than weekdays and the model misses it: the residuals repeat "
               "every 7 days, so the seasonal lags 7 and 14 carry large positive autocorrelation and the "
               "advice should suggest a weekly seasonal term.",
    }


def vibration_sensor_volatility_bursts():
    rng = np.random.default_rng(6)
    values = rounded(garch11(rng, 600, 0.05, 0.3, 0.65), 4)
    payload = {"name": "packaging line 3, bearing sensor: vibration residuals (mm/s)", "values": values}
    return payload, {
        "scenario": "A bearing vibration sensor on a packaging line, 600 readings of residual velocity after "
                    "removing the machine's known cycle. Quiet stretches alternate with bursts of large swings.",
        "requires": ["mcleod_li"],
        "expect": {"n": 600, "ljung_box_rejects_at_max_lag": False, "test_rejects": {"mcleod_li": True}},
        "why": "Simulated as GARCH(1,1) (omega 0.05, alpha 0.3, beta 0.65): the readings themselves are "
               "uncorrelated, so Ljung-Box on the levels should not reject, but their size clusters, so the "
               "McLeod-Li test on the squared values should. Uncorrelated is not the same as independent.",
    }


def farm_shop_short_monthly_residuals():
    rng = np.random.default_rng(2)
    values = rounded(rng.normal(0.0, 380.0, 24), 0)
    payload = {"name": "farm shop: monthly takings, forecast residuals (EUR)", "values": values, "period": 12}
    return payload, {
        "scenario": "A small farm shop has only two years of monthly takings; these are the residuals of its "
                    "seasonal forecast, in euros.",
        "expect": {"n": 24, "period": 12, "white_noise": True, "acf_outside_at_most": 1,
                   "cautions_mention": ["short"]},
        "why": "Simulated as independent normal draws, so the tests should not reject; with 24 points the "
               "band is wide (about +-0.4) and the asymptotic approximations are rough, which the cautions "
               "must say.",
    }


def warehouse_daily_picks_trend():
    rng = np.random.default_rng(8080)
    n = 200
    values = rounded(1800.0 + 4.5 * np.arange(n) + rng.normal(0.0, 60.0, n), 0)
    payload = {"name": "distribution centre: daily order lines picked", "values": values}
    return payload, {
        "scenario": "A distribution centre's daily count of order lines picked over 200 days of steady "
                    "growth, sent raw without a period or a model.",
        "expect": {"n": 200, "white_noise": False, "acf_outside_includes": list(range(1, 11))},
        "why": "A linear trend (4.5 more lines a day) dominates the noise: the autocorrelation stays large "
               "and decays slowly over every lag, the signature of a trend that should be removed "
               "(differenced or detrended) before judging the residuals.",
    }


def ferry_terminal_daily_gaps():
    rng = np.random.default_rng(5150)
    n_days = 124
    x = 2600.0 + ar1(rng, n_days, 0.65, 140.0)
    start = datetime(2025, 3, 1)
    dropped_days = {17, 18, 63, 90}  # terminal closed: no row at all in the export
    nulls = {5, 33, 34, 71, 102, 115}  # counter fault: row present, value empty
    stamps, values = [], []
    for d in range(n_days):
        if d in dropped_days:
            continue
        stamps.append((start + timedelta(days=d)).strftime("%Y-%m-%d"))
        values.append(None if d in nulls else round(float(x[d]), 0))
    payload = {"name": "ferry terminal: daily foot passengers", "values": values, "timestamps": stamps,
               "missing": "interpolate"}
    return payload, {
        "scenario": "A ferry terminal's daily count of foot passengers, exported from its gate counters: on "
                    "four days the terminal was closed and the export has no row; on six days a counter "
                    "fault left the value empty (null).",
        "requires": ["missing"],
        "expect": {"period": 7, "period_source": "timestamps", "n_missing_at_least": 6, "white_noise": False,
                   "acf_outside_includes": [1]},
        "why": "Simulated as AR(1) with coefficient 0.65 around 2,600 passengers: busy days follow busy days. "
               "The gaps must be reported and handled (here by interpolation), after which lag 1 stands far "
               "outside the band and the series is not white noise.",
    }


def cold_store_hourly_temperature_csv():
    rng = np.random.default_rng(39)
    n = 168
    temp = -18.5 + rng.normal(0.0, 0.35, n)
    start = datetime(2025, 11, 3)
    lines = ["zeitpunkt;temperatur_c;tuer_offen"]
    for h in range(n):
        stamp = (start + timedelta(hours=h)).strftime("%Y-%m-%dT%H:%M:%S")
        lines.append(f"{stamp};{temp[h]:.2f}".replace(".", ",") + f";{int(rng.random() < 0.1)}")
    payload = "\r\n".join(lines) + "\r\n"
    return payload, {
        "scenario": "A food wholesaler's cold store logs its temperature every hour; the spreadsheet export "
                    "(a German-locale machine) uses semicolons between fields, decimal commas and CRLF line "
                    "ends, with a door-open flag column the analysis should ignore.",
        "requires": ["csv"],
        "send": {"content_type": "text/csv", "query": {"column": "temperatur_c", "time_column": "zeitpunkt",
                                                      "delimiter": ";", "decimal": ","}},
        "expect": {"n": 168, "period": 24, "period_source": "timestamps", "white_noise": True,
                   "acf_outside_at_most": 2},
        "why": "The controller holds -18.5 C and the readings were simulated as independent noise (sd 0.35 C): "
               "once the decimal commas are read correctly (-18,41 is -18.41) and the hourly stamps imply a "
               "daily period of 24, nothing is left to explain.",
    }


def retail_weekly_batch_500():
    rng = np.random.default_rng(500500)
    n_series, n = 500, 104
    planted = sorted(rng.choice(np.arange(n_series - 1), size=40, replace=False).tolist())
    planted_set = set(planted)
    series = []
    for i in range(n_series):
        sid = f"store-{i + 1:03d}"
        if i == n_series - 1:
            values = [412.0] * n  # a till feed stuck on one number: an invalid series
        elif i in planted_set:
            values = rounded(ar1(rng, n, 0.7, 35.0), 1)
        else:
            values = rounded(rng.normal(0.0, 35.0, n), 1)
        series.append({"id": sid, "values": values})
    payload = {"series": series}
    return payload, {
        "scenario": "A grocery chain forecasts weekly sales for each of its 500 stores and checks two years "
                    "(104 weeks) of forecast errors for every store at once, with the default lags (1 to 20). "
                    "The errors come from a judgemental forecast, not a fitted model, so model_df stays 0; no "
                    "period is sent because two years hold only two yearly cycles. One store's till feed was "
                    "stuck and repeats a single number.",
        "requires": ["batch"],
        "send": {"endpoint": "/v1/diagnostics/batch"},
        "expect": {"batch": {
            "count": 500,
            "not_white_noise_includes": [f"store-{i + 1:03d}" for i in planted],
            "error_ids": ["store-500"],
            "max_false_alarm_share": 0.1,
        }},
        "why": "40 stores (listed) were simulated with AR(1) errors, coefficient 0.7, left by a forecast that "
               "misses their week-to-week carry-over; all must be flagged. 459 stores were simulated as white "
               "noise: a rule sized at 5% flags some of them by chance (Ljung-Box runs a little above its "
               "nominal size at n = 104, so 5-8% is usual here), but fewer than 10%. The "
               "stuck store is constant, so its autocorrelation is undefined: it gets its own problem+json "
               "error while the other 499 are still answered.",
    }


def dairy_daily_milk_intake_model_check():
    rng = np.random.default_rng(2)
    values = rounded(ar1(rng, 182, 0.55, 4.2), 2)
    payload = {"name": "dairy co-operative, valley creamery: daily milk intake minus plan (thousand litres)",
               "values": values, "order": "suggested"}
    return payload, {
        "scenario": "A dairy co-operative plans the milk its valley creamery takes in each day; these are 26 weeks "
                    "of intake minus plan, in thousands of litres. The planner asks whether a simple time-series "
                    "model of the shortfalls would leave nothing but noise.",
        "requires": ["model_check"],
        "send": {"endpoint": "/v1/model-check"},
        "expect": {"model_check": {"model": "ARIMA(1,0,0)", "before_white_noise": False,
                                   "residuals_white_noise": True, "structure_removed": True}},
        "why": "Simulated as AR(1) with coefficient 0.55 (sd 4.2): a shortfall one day carries into the next as "
               "herds and collection rounds catch up. The deviations themselves are far from white noise; the "
               "suggested model should be an AR(1) with a constant, and its residuals should show no structure.",
    }


def bus_line_daily_boardings_stability():
    rng = np.random.default_rng(5)
    n, switch = 280, 168
    e = rng.normal(0.0, 55.0, n)
    x = np.zeros(n)
    for t in range(n):
        x[t] = (0.65 * x[t - 1] if t >= switch else 0.0) + e[t]
    stamps = [(date(2025, 1, 6) + timedelta(days=i)).isoformat() for i in range(n)]
    payload = {"name": "bus operator, line 12: daily boardings, forecast errors", "values": rounded(x, 0),
               "timestamps": stamps, "window": 28, "step": 7}
    return payload, {
        "scenario": "A regional bus operator forecasts daily boardings on each line; these are 40 weeks of the "
                    "forecast errors of line 12, checked four weeks at a time, one week apart. A new timetable "
                    "started on Monday 23 June 2025.",
        "requires": ["stability"],
        "send": {"endpoint": "/v1/stability"},
        "expect": {"stability": {"structure_change_near": switch, "within": 28, "first_window_white_noise": True,
                                 "last_window_white_noise": False}},
        "why": "The errors were simulated as independent draws (sd 55 boardings) until the new timetable, then as "
               "AR(1) with coefficient 0.65: late buses now carry passengers over from one day to the next, a "
               "pattern the forecast misses. The early windows look like white noise, the late ones do not, and "
               "the change reading should place the structure change at the timetable change (index 168), "
               "within one window.",
    }


def district_heating_daily_demand_drivers():
    rng = np.random.default_rng(1)
    n = 240
    temperature = ar1(rng, n + 30, 0.75, 2.5)  # deviation from the seasonal normal, from 30 days before
    newsletters = np.round(np.clip(rng.normal(3.0, 1.5, n + 10), 0.0, None))
    errors = -3.0 * temperature[29:29 + n] + ar1(rng, n, 0.4, 9.0)  # yesterday's temperature, lag 1
    start = date(2025, 3, 1)

    def days(first: int, count: int) -> list[str]:
        return [(start + timedelta(days=first + i)).isoformat() for i in range(count)]

    payload = {"name": "district heating, west network: daily heat demand forecast errors (MWh)",
               "values": rounded(errors, 1), "timestamps": days(0, n),
               "drivers": [{"name": "outdoor temperature minus normal (C)", "values": rounded(temperature, 1),
                            "timestamps": days(-30, n + 30)},
                           {"name": "customer newsletters sent", "values": newsletters.tolist(),
                            "timestamps": days(0, n + 10)}]}
    return payload, {
        "scenario": "A district heating company forecasts the daily heat demand of its west network; these are "
                    "240 days of forecast errors in MWh. Two candidate drivers the forecast leaves out: the outdoor "
                    "temperature's deviation from normal (exported from 30 days earlier) and the number of customer "
                    "newsletters sent each day (to 10 days later); both are lined up with the errors by date.",
        "requires": ["driver_check"],
        "send": {"endpoint": "/v1/driver-check"},
        "expect": {"driver_check": {"linked": {"outdoor temperature minus normal (C)": [1]},
                                    "not_linked": ["customer newsletters sent"]}},
        "why": "The errors were simulated as -3 MWh per degree of yesterday's temperature deviation (AR(1), "
               "coefficient 0.75) plus AR(1) noise: buildings cool overnight, so yesterday's weather drives today's "
               "demand. After prewhitening, the temperature should stand out at lag 1, the driver leading. The "
               "newsletter counts were drawn independently and should show no link.",
    }


def wind_farm_six_hour_forecast_errors():
    rng = np.random.default_rng(6)
    n, h, phi = 336, 6, 0.8
    shocks = rng.normal(0.0, 2.5, n + h - 1)
    errors = sum(phi ** j * shocks[h - 1 - j:h - 1 - j + n] for j in range(h))  # the best 6-hour forecast's error
    payload = {"name": "wind farm, ridge site: output forecast 6 hours ahead, errors (MW)",
               "values": rounded(errors, 2), "horizon": h}
    return payload, {
        "scenario": "A wind farm operator forecasts the ridge site's hourly output 6 hours ahead; these are two "
                    "weeks of those forecasts' errors (actual minus forecast, MW), sent with horizon 6.",
        "requires": ["horizon"],
        "expect": {"n": 336, "horizon": 6, "white_noise": True, "acf_outside_includes": [1, 2],
                   "cautions_mention": ["lags 1 to 5 are not tested"]},
        "why": "The output follows an AR(1) (phi 0.8) and each forecast is the best one 6 hours ahead, so its error "
               "is a weighted sum of the next 6 shocks: correlated at lags 1 to 5 by construction and at no lag "
               "beyond. Read with horizon 6 the reading tests lags 6 and up and finds nothing; sent without it, the "
               "same values would be called autocorrelated at lag 1.",
    }


SCENARIOS = [
    bakery_daily_residuals,
    water_utility_monthly_pump_energy,
    call_centre_hourly_wait_residuals,
    ice_cream_kiosk_daily_residuals,
    vibration_sensor_volatility_bursts,
    farm_shop_short_monthly_residuals,
    warehouse_daily_picks_trend,
    ferry_terminal_daily_gaps,
    cold_store_hourly_temperature_csv,
    retail_weekly_batch_500,
    dairy_daily_milk_intake_model_check,
    bus_line_daily_boardings_stability,
    district_heating_daily_demand_drivers,
    wind_farm_six_hour_forecast_errors,
]


def render() -> dict[str, str]:
    """File name -> exact text for every payload and sidecar."""
    files = {}
    for make in SCENARIOS:
        payload, sidecar = make()
        name = make.__name__
        if isinstance(payload, str):
            payload_file = f"{name.removesuffix('_csv')}.csv"
            files[payload_file] = payload
        else:
            payload_file = f"{name}.json"
            files[payload_file] = json.dumps(payload, separators=(", ", ": ")) + "\n"
        send = {"endpoint": "/v1/diagnostics", "content_type": "application/json", "query": {}}
        send.update(sidecar.pop("send", {}))
        ordered = {"payload": payload_file, "scenario": sidecar.pop("scenario"), "send": send,
                   "requires": sidecar.pop("requires", []), **sidecar}
        files[f"{Path(payload_file).stem}.expect.json"] = json.dumps(ordered, indent=2) + "\n"
    return files


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--check", action="store_true", help="compare with the committed files, write nothing")
    args = parser.parse_args(argv)
    stale = []
    for name, text in render().items():
        path = HERE / name
        if args.check:
            if not path.exists() or path.read_bytes() != text.encode("utf-8"):
                stale.append(name)
        else:
            path.write_bytes(text.encode("utf-8"))
    if stale:
        print("out of date (run python demo_payloads/generate.py):", ", ".join(stale), file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
