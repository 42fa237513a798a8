"""CALIBRATION.md from a results dict: how it was run, the targets with met / not met, the rates behind them."""
from __future__ import annotations

from . import targets as tg
from .scenarios import SCENARIOS

NOTES_START = "<!-- notes: hand-written, kept when the report is regenerated -->"
NOTES_END = "<!-- /notes -->"


def pct(value: dict | None, key: str = "rate") -> str:
    """"4.3% ± 0.5" (a rate and its Monte Carlo standard error, in points), or n/a."""
    if value is None or value.get(key) is None:
        return "n/a"
    return f"{100 * value[key]:.1f}% ± {100 * value['se']:.1f}"


def _status(rows: list[dict]) -> str:
    if not rows:
        return "-"
    words = {True: "met", False: "**not met**", None: "n/a"}
    return " / ".join(words[r["ok"]] for r in rows)


def _notes(previous: str) -> str:
    if NOTES_START in previous and NOTES_END in previous:
        return previous[previous.index(NOTES_START): previous.index(NOTES_END) + len(NOTES_END)]
    return f"{NOTES_START}\n(no notes yet)\n{NOTES_END}"


def _kinds(rates: dict, skip: str | None = None) -> str:
    shown = [f"{k} {100 * v['rate']:.1f}" for k, v in sorted(rates["kinds"].items(), key=lambda kv: -kv[1]["rate"])
             if k != skip and v["rate"] >= 0.005]
    return ", ".join(shown) or "-"


def _header(r: dict) -> list[str]:
    m = r["machine"]
    out = [
        "# Calibration",
        "",
        "Measured by `make calibrate` (`python -m calibration.run`), which rewrites this file and `CALIBRATION.json`",
        "(every rate with its count). Seeded series from known processes go through the service in process",
        "(`POST /v1/diagnostics/batch`, `detail: \"full\"`, the app's test client; orjson on both sides), and each",
        "answer is read: `verdict.white_noise`, the kinds in `verdict.structure`, the `code` of the first advice item.",
        "A rate ± its Monte Carlo standard error sqrt(p (1 - p) / reps), in points; the rates count answered series.",
        "",
    ]
    if r.get("quick"):
        out += ["> **Quick run on tiny sizes: these rates say nothing about calibration.**", ""]
    if r.get("only"):
        out += [f"> **Partial run** (`--only {' '.join(r['only'])}`): the other scenarios were not run.", ""]
    out += [
        "## How it was run",
        "",
        f"- command: `{r['command']}`",
        f"- seed: {r['seed']} (one seed per scenario and length, `calibration.scenarios.seed_for`; the variants of a"
        " scenario and length, with and without timestamps and at each confidence, judge the same series)",
        f"- date: {r['date']}; git commit {r['commit']}; wall time {r['wall_seconds']:.0f} s",
        f"- series per case: {r['plan']['iid_reps']:,} (i.i.d.), {r['plan']['power_reps']:,} (AR(1) 0.3, MA(1) 0.4),"
        f" {r['plan']['mechanism_reps']:,} (other processes); batches: {r['plan']['noise_batches']:,} of pure noise,"
        f" {r['plan']['ar_batches']:,} with AR(1) series",
        f"- {m['cpu']}, {m['cores']} cores; Python {m['python']}; "
        + ", ".join(f"{k} {v}" for k, v in m["versions"].items() if v),
        f"- the service's vocabulary (its OpenAPI document): structure kinds {', '.join(r['vocabulary']['structure_kinds'])};"
        f" advice items {'carry a' if r['vocabulary']['advice_has_code'] else 'carry **no**'} `code`",
        "",
        "Reading these numbers: a rate within its bound is not proof of calibration, only no evidence against it at",
        "this Monte Carlo precision; with dozens of cases judged, a few point estimates land past a bound by chance",
        "when the true rate sits at it (the tests allow 2.5 standard errors at the bound). The verdict's tests are",
        "large-sample approximations, rougher for short series. \"n/a\": the service does not report what the",
        "target reads (yet).",
        "",
    ]
    return out


def _targets(rows: list[dict]) -> list[str]:
    out = ["## Targets", "", "| target | cases | met | not met | n/a | worst case |", "| --- | --- | --- | --- | --- | --- |"]
    for s in tg.summary(rows):
        w = s["worst"]
        worst = "-" if w is None else (f"{w['case']}: {100 * w['measured']:+.1f} points vs {100 * w['bound']:+.1f}"
                                       if w.get("paired") else
                                       f"{w['case']}: {100 * w['measured']:.1f}% vs {100 * w['bound']:.0f}%")
        out.append(f"| {s['wording']} | {s['cases']} | {s['met']} | {s['not_met']} | {s['na']} | {worst} |")
    return out + [""]


def _matrix(cases: list[dict]) -> list[str]:
    """Scenario x length: not-white-noise rate / any-structure rate, in %."""
    ns = sorted({c["n"] for c in cases})
    cells = {(c["scenario"], c["timestamps"], c["confidence"], c["n"]): c["rates"] for c in cases}
    out = ["| scenario | timestamps | c | " + " | ".join(f"n {n:,}" for n in ns) + " |",
           "| --- | --- | --- |" + " --- |" * len(ns)]
    for scenario, stamps, conf in dict.fromkeys(k[:3] for k in cells):
        row = []
        for n in ns:
            rt = cells.get((scenario, stamps, conf, n))
            row.append("" if rt is None else
                       f"{100 * rt['not_white_noise']['rate']:.1f} / {100 * rt['any_structure']['rate']:.1f}")
        out.append(f"| {scenario} | {'daily' if stamps else '-'} | {conf:g} | " + " | ".join(row) + " |")
    return out + [""]


def _case_rows(rows: list[dict], case: dict, *names: str) -> list[dict]:
    key = tg.identity(case)
    return [r for r in rows if r["target"] in names and all(r.get(k) == v for k, v in key.items())]


def render(r: dict, previous: str = "") -> str:
    rows = r["targets"]
    out = _header(r) + _targets(rows)
    iid = [c for c in r["cases"] if c["family"] == "iid"]
    if iid:
        out += ["## i.i.d. series: false alarms and named structure", "",
                "In short, % of series called not white noise / % with any structure named:", ""]
        out += _matrix(iid)
        out += ["Bound: (1 - c) + 1 point. Status: false-alarm target / any-structure target. Kinds named: % of series.",
                "",
                "| scenario | n | timestamps | c | reps | not white noise | any structure | kinds named | bound | status |",
                "| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |"]
        for c in iid:
            rt = c["rates"]
            bound = (1 - c["confidence"]) + 0.01
            out.append(f"| {c['scenario']} | {c['n']:,} | {'daily' if c['timestamps'] else '-'} | {c['confidence']:g} |"
                       f" {c['answered']:,} | {pct(rt['not_white_noise'])} | {pct(rt['any_structure'])} |"
                       f" {_kinds(rt)} | {100 * bound:.0f}% |"
                       f" {_status(_case_rows(rows, c, 'iid_false_alarm', 'iid_any_structure'))} |")
        out.append("")
    power = [c for c in r["cases"] if "reference" in c]
    if power:
        out += ["## Power beside a single Ljung-Box test", "",
                "The same series judged by the verdict and by statsmodels `acorr_ljungbox` at lag 10 (the reference),"
                " both at level 1 - c. The difference is paired (series by series); target: at least -5 points.", "",
                "| scenario | n | reps | verdict: not white noise | Ljung-Box(10) rejects | difference | status |",
                "| --- | --- | --- | --- | --- | --- | --- |"]
        for c in power:
            ref = c["reference"]
            d = ref["verdict_minus_reference"]
            out.append(f"| {c['scenario']} | {c['n']:,} | {c['answered']:,} | {pct(c['rates']['not_white_noise'])} |"
                       f" {pct(ref['rejects'])} | {100 * d['difference']:+.1f} ± {100 * d['se']:.1f} points |"
                       f" {_status(_case_rows(rows, c, 'power'))} |")
        out.append("")
    others = [c for c in r["cases"] if c["family"] != "iid"]
    if others:
        out += ["## Processes with (and without) structure", "",
                "Expected: the verdict (white noise or not), the structure kind (\"none\": nothing named) and the code of the"
                " first advice item. Targets at n 300 (see above); other lengths are shown.", "",
                "| scenario | n | reps | expected verdict | not white noise | expected structure | named | "
                "expected first advice | given | other kinds named | status |",
                "| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |"]
        for c in others:
            e, rt = c["expected"], c["rates"]
            status = _status(_case_rows(rows, c, "mechanism_structure", "mechanism_advice", "garch_autocorrelation"))
            out.append(f"| {c['scenario']} | {c['n']:,} | {c['answered']:,} |"
                       f" {'white noise' if e['white_noise'] else 'not white noise'} | {pct(rt['not_white_noise'])} |"
                       f" {e['structure'] or 'none'} | {pct(rt['expected_structure'])} | {e['advice']} |"
                       f" {pct(rt['expected_advice'])} | {_kinds(rt, e['structure'])} | {status} |")
        out += ["", "Processes: " + "; ".join(f"{name}: {SCENARIOS[name].description}"
                                             for name in dict.fromkeys(c["scenario"] for c in others)) + ".", ""]
    out += _batch(r.get("batch"))
    out += ["## Analysis", "", _notes(previous), ""]
    return "\n".join(out)


def _batch(b: dict | None) -> list[str]:
    if not b:
        return []
    no, ar = b["noise"], b["ar"]
    fdp = ar["false_discovery_proportion"]
    out = ["## Batches and false discovery", "",
           f"Each batch is one request of {b['batch_size']} series at confidence {b['confidence']:g}. A series counts as"
           " flagged after adjustment when its Benjamini-Hochberg q-value (`summary.false_discovery.q_values`, in"
           " request order; the harness copies it beside each result as `fdr_q_value`) is at most 1 - c.",
           "",
           f"- batch-level reading: {('`' + b['batch_path'] + '`') if b['batch_path'] else '**none** (n/a)'}",
           "",
           "| part | batches | measured | target |", "| --- | --- | --- | --- |",
           f"| pure noise (n {no['n']}): batches with any series flagged, each verdict on its own (no adjustment) |"
           f" {no['batches']:,} | {pct(no['any_flagged_unadjusted'])} | (shown) |",
           f"| pure noise: batches with any series flagged after adjustment | {no['batches']:,} |"
           f" {pct(no['any_flagged_adjusted'])} | at most {100 * (1 - b['confidence']):.0f}% |",
           f"| {ar['per_batch']} AR(1) phi {ar['phi']} series per batch (n {ar['n']}): found by their own verdict |"
           f" {ar['batches']:,} | {pct(ar['found_unadjusted'])} | (shown) |",
           f"| the same: found after adjustment | {ar['batches']:,} | {pct(ar['found_adjusted'])} | at least 80% |",
           f"| the same batches: share of noise series among those flagged after adjustment (mean over batches) |"
           f" {ar['batches']:,} | {pct(fdp, 'mean')} | (shown; nominal at most {100 * (1 - b['confidence']):.0f}%) |",
           ""]
    return out
