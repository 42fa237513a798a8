"""The page, end to end in a real browser: Playwright driving Debian's chromium against gunicorn.

`make test` installs chromium with apt-get when /usr/bin/chromium is missing. Screenshots go to a
temporary folder, or to the folder named by LAGSIGHT_SCREENSHOTS (`make screenshots` uses docs/).
"""
from __future__ import annotations

import json
import os
import threading
from contextlib import contextmanager
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path

import numpy as np
import pytest

from lagsight.outputs import style

from .live_server import gunicorn
from .test_numbers import CASES, LOCALES, _values, export

pytestmark = [pytest.mark.slow, pytest.mark.browser]

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_payloads"
CHROMIUM = "/usr/bin/chromium"
LAUNCH_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
               "--disable-sync", "--no-first-run"]


@pytest.fixture(scope="module")
def browser():
    assert Path(CHROMIUM).exists(), f"{CHROMIUM} is missing: `make test` installs it (apt-get install chromium)"
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=LAUNCH_ARGS, headless=True)
        yield b
        b.close()


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1200, "height": 900})
    pg = context.new_page()
    errors: list[str] = []
    pg.on("pageerror", lambda exc: errors.append(str(exc)))
    pg.on("console", lambda msg: errors.append(msg.text) if msg.type == "error" else None)
    yield pg
    context.close()
    # no script errors and no CSP violations; a 422 answer is logged by the browser and is expected
    assert [e for e in errors if "status of 422" not in e] == []


@pytest.fixture(scope="module")
def shots(tmp_path_factory) -> Path:
    target = os.environ.get("LAGSIGHT_SCREENSHOTS")
    folder = Path(target) if target else tmp_path_factory.mktemp("screenshots")
    folder.mkdir(parents=True, exist_ok=True)
    return folder


def _demo(name: str) -> dict:
    return json.loads((DEMO / f"{name}.json").read_text())


def _check(page, payload: dict) -> None:
    page.fill("#values", "\n".join(str(v) for v in payload["values"]))
    if payload.get("period"):
        page.fill("#period", str(payload["period"]))
    page.fill("#model-df", str(payload.get("model_df", 0)))
    page.click("#submit")
    page.wait_for_selector("#result:not([hidden])")


def test_pasted_white_noise_series_shows_verdict_and_both_charts(page, live_server, shots):
    payload = _demo("bakery_daily_residuals")
    page.goto(live_server + "/")
    assert page.title().startswith("Lagsight")
    _check(page, payload)
    assert page.inner_text("#verdict").startswith("Consistent with white noise")
    assert "n = 56" in page.inner_text("#facts") and "period 7" in page.inner_text("#facts")
    for chart in ("#acf-chart", "#pacf-chart"):
        assert page.locator(f"{chart} svg polygon.band").count() == 1  # the band is one shaded region
        assert page.locator(f"{chart} svg rect.bar").count() == 17  # one bar per lag 1..max_lag
        assert page.locator(f"{chart} svg .mark").count() == 2  # seasonal lags 7 and 14
    assert page.locator("#acf-chart rect.bar:not(.inside)").count() == 0
    assert page.locator("#cautions li").count() >= 2
    assert page.locator("#tests-table tbody tr").count() >= 4
    page.screenshot(path=str(shots / "page-white-noise.png"), full_page=True)


def test_seasonal_residuals_show_spikes_outside_the_band_and_advice(page, live_server, shots):
    page.goto(live_server + "/")
    _check(page, _demo("ice_cream_kiosk_daily_residuals"))
    assert page.inner_text("#verdict").startswith("Not white noise")
    outside = page.locator("#acf-chart rect.bar:not(.inside)")
    lags = {int(outside.nth(i).get_attribute("data-lag")) for i in range(outside.count())}
    assert {7, 14} <= lags
    assert "seasonal" in page.inner_text("#advice").lower()
    page.screenshot(path=str(shots / "page-seasonal.png"), full_page=True)


def test_gaps_filled_on_request_and_a_widening_band(page, live_server, shots):
    payload = _demo("ferry_terminal_daily_gaps")  # six nulls: empty lines in the pasted column
    page.goto(live_server + "/")
    page.fill("#values", "\n".join("" if v is None else str(v) for v in payload["values"]))
    assert "(6 missing)" in page.inner_text("#values-count")
    page.select_option("#missing", "interpolate")
    page.select_option("#band", "bartlett")
    page.click("#submit")
    page.wait_for_selector("#result:not([hidden])")
    assert "6 missing" in page.inner_text("#facts")
    assert page.inner_text("#verdict").startswith("Not white noise")
    heights = page.evaluate("""() => new Set(document.querySelector('#acf-chart polygon.band')
        .getAttribute('points').split(' ').map(p => p.split(',')[1])).size""")
    assert heights > 4  # Bartlett's band widens with the lag: not one flat strip
    page.screenshot(path=str(shots / "page-gaps-bartlett.png"), full_page=True)


def test_dropped_csv_with_semicolons_and_decimal_commas_is_read_with_its_timestamps(page, live_server, shots):
    page.goto(live_server + "/")
    page.set_input_files("#csv-file", str(DEMO / "cold_store_hourly_temperature.csv"))
    page.wait_for_selector("#csv-columns:not([hidden])")
    assert page.input_value("#csv-value-column") == "1"  # temperatur_c, not the time or door columns
    assert page.input_value("#csv-time-column") == "0"
    assert page.inner_text("#csv-status") == "Read cold_store_hourly_temperature.csv: 169 lines, 168 values."
    read = page.inner_text("#values-count")  # what was read, with the first reading ("-18,49" in the file)
    assert read.startswith('168 values from "temperatur_c", timestamps from "zeitpunkt", read with decimal comma: '
                           "-18.49, -18.4, ")
    page.click("#submit")
    page.wait_for_selector("#result:not([hidden])")
    facts = page.inner_text("#facts")
    assert "n = 168" in facts and "period 24 (from timestamps)" in facts
    page.screenshot(path=str(shots / "page-csv.png"), full_page=True)


def test_bad_input_from_the_service_shows_its_problem_detail(page, live_server, shots):
    page.goto(live_server + "/")
    page.fill("#values", "5\n5\n5\n5\n5\n5")
    page.click("#submit")
    alert = page.locator("#problem[role=alert]")
    alert.wait_for(state="visible")
    assert "constant" in alert.inner_text()  # the service's 422 detail, pointing at the values
    assert page.locator("#result").is_hidden()
    page.screenshot(path=str(shots / "page-error.png"), full_page=True)


def test_text_that_is_not_a_number_is_named_before_anything_is_sent(page, live_server):
    page.goto(live_server + "/")
    sent = []
    page.on("request", lambda r: sent.append(r.url) if r.method == "POST" else None)
    page.fill("#values", "1.5\n2.25\nabc\n3")
    page.click("#submit")
    page.locator("#problem").wait_for(state="visible")
    assert 'Value 3 ("abc") is not a number' in page.inner_text("#problem")
    assert sent == []


def test_decimal_commas_are_read_when_chosen_and_a_stray_point_is_named(page, live_server):
    values = [-0.6, 5.25, 23.2, -24.4, 20.75, 9.0, -1.0, -17.4, -7.4, -13.8, 1234.5, -2.5]
    page.goto(live_server + "/")
    page.select_option("#decimal", ",")
    page.fill("#values", "; ".join(f"{v:,.2f}".replace(",", " ").replace(".", ",").replace(" ", ".")
                                   for v in values))  # 1.234,50 and -0,60 as a spreadsheet writes them
    assert page.inner_text("#values-count") == ("12 values, read with decimal comma: -0.6, 5.25, 23.2, -24.4, 20.75, "
                                                "…, -2.5")
    page.click("#submit")
    page.wait_for_selector("#result:not([hidden])")
    shown = page.evaluate("() => [...document.querySelectorAll('#lags-table tbody tr')].map(r => r.cells[1].textContent)")
    x = np.array(values) - np.mean(values)  # lag-1 autocorrelation, biased estimator (divide by n)
    assert float(shown[0]) == pytest.approx(np.dot(x[:-1], x[1:]) / np.dot(x, x), abs=5e-4)
    page.fill("#values", "1,5\n2.5\n3,25")
    page.click("#submit")
    page.locator("#problem").wait_for(state="visible")
    assert ('Value 2 ("2.5") is not a number; it reads as a number with a decimal point: choose "point" or "work it '
            'out" as the decimal mark.') in page.inner_text("#problem")


def _js(v: float) -> str:
    """A number as JavaScript's String() writes it (the shortest repr; no ".0" on whole numbers)."""
    text = repr(float(v))
    return text[:-2] if text.endswith(".0") else text


def test_the_page_reads_numbers_by_the_services_rule(page, live_server):
    """The shared table of cases, and 3,000 seeded random strings, read by reading.js and by inputs/numbers.py."""
    from lagsight.inputs import numbers

    page.goto(live_server + "/")
    read = """([texts, marks]) => texts.map((t) => marks.map((m) => {
        try { const v = window.LagsightReading.readNumber(t, m); return v; } catch (e) { return "x"; } }))"""
    texts = [c[0] for c in CASES["numbers"]]
    assert page.evaluate(read, [texts, [".", ","]]) == [[c[1], c[2]] for c in CASES["numbers"]]
    rng = np.random.default_rng(17)
    alphabet = list("0123456789.,' -+eE") + ["\u00a0", "\u202f", "\u2212", "\u2019", "NA", "\t"]
    randoms = ["".join(rng.choice(alphabet, size=rng.integers(0, 10))) for _ in range(3000)]
    in_js = page.evaluate(read, [randoms, [".", ","]])
    for text, got in zip(randoms, in_js):
        expected = []
        for mark in ".,":
            try:
                expected.append(numbers.read(text, mark))
            except ValueError:
                expected.append("x")
        assert got == expected, text
    columns = page.evaluate("""(cases) => cases.map((c) => {
        const r = window.LagsightReading.readColumn(c.cells, null);
        return [r.mark, r.ambiguous, r.bad, r.values]; })""", CASES["columns"])
    for case, (mark, ambiguous, bad, values) in zip(CASES["columns"], columns):
        py = numbers.read_column(case["cells"])
        assert (mark, ambiguous, bad) == (py.mark, py.ambiguous, py.bad), case
        if not bad:
            assert values == py.values, case


def test_a_decimal_comma_paste_in_the_default_mode_asks_instead_of_doubling_the_count(page, live_server):
    values = _demo("bakery_daily_residuals")["values"]  # 56 values
    written = [f"{v:.2f}".replace(".", ",") for v in values]
    page.goto(live_server + "/")
    sent = []
    page.on("request", lambda r: sent.append(r.url) if r.method == "POST" else None)
    page.fill("#values", "1,5 2,25 3,75")  # the three numbers could be six: the page asks
    assert page.input_value("#decimal") == "auto"
    assert page.inner_text("#values-count") == "These numbers can be read in more than one way: choose one."
    options = page.locator("#reading-options button")
    assert [options.nth(i).inner_text() for i in range(options.count())] == [
        "3 values: 1.5, 2.25, 3.75 (decimal comma)", "6 values: 1, 5, 2, 25, 3, 75 (commas between values)"]
    page.fill("#values", " ".join(written))
    page.click("#submit")  # not sent while the reading is open
    page.locator("#problem").wait_for(state="visible")
    assert "choose one under Values first" in page.inner_text("#problem") and sent == []
    assert page.locator("#reading-options button").first.inner_text().startswith("56 values: ")
    page.locator("#reading-options button", has_text="(decimal comma)").click()
    assert page.is_hidden("#reading-choice")
    first = _js(float(written[0].replace(",", ".")))
    assert page.inner_text("#values-count").startswith(f"56 values, read with decimal comma: {first}, ")
    page.click("#submit")
    page.wait_for_selector("#result:not([hidden])")
    assert "n = 56" in page.inner_text("#facts") and len(sent) == 1
    page.fill("#values", "\n".join(written))  # one number a line: commas cannot separate values, nothing to ask
    assert page.is_hidden("#reading-choice")
    assert page.inner_text("#values-count").startswith("56 values, read with decimal comma: ")


@pytest.mark.parametrize("name,delimiter,decimal,group,quote", LOCALES, ids=[loc[0] for loc in LOCALES])
def test_spreadsheet_tables_of_common_locales_are_read_as_the_service_reads_them(page, live_server, name, delimiter,
                                                                                 decimal, group, quote):
    values = _values()
    page.goto(live_server + "/")
    page.fill("#values", export(values, delimiter, decimal, group, quote))
    assert page.is_visible("#csv-columns") and page.input_value("#csv-value-column") == "1"
    shown = ", ".join(_js(v) for v in values[:5]) + f", …, {_js(values[-1])}"
    mark = "comma" if decimal == "," else "point"
    assert page.inner_text("#values-count") == (f'60 values from "litres", timestamps from "day", read with decimal '
                                                f"{mark}: {shown}")
    if group == "\u202f":
        page.click("#submit")
        page.wait_for_selector("#result:not([hidden])")
        assert "n = 60" in page.inner_text("#facts") and "period 7 (from timestamps)" in page.inner_text("#facts")


def test_the_value_column_is_chosen_by_the_whole_table_and_both_columns_can_be_changed(page, live_server, shots):
    """NA fills the first 22 rows of the value column: the page still picks it, not the dates or the notes."""
    rng = np.random.default_rng(5)
    kwh = (rng.standard_normal(80) * 12 + 410).round(1)
    rows = []
    for i, v in enumerate(kwh):
        cell = "NA" if i < 22 or i in (40, 41) else f"{v:.1f}"
        rows.append(f"2025-01-{1 + i // 24:02d}T{i % 24:02d}:00:00,{cell},{'night' if i % 2 else 'day'},{i % 3}")
    text = "reading_at,pump_kwh,shift,crew\n" + "\n".join(rows) + "\n"
    page.goto(live_server + "/")
    page.fill("#values", text)
    assert page.input_value("#csv-value-column") == "1" and page.input_value("#csv-time-column") == "0"
    assert page.inner_text("#values-count").startswith(
        '80 values (24 missing) from "pump_kwh", timestamps from "reading_at", read with decimal point: NA, NA, ')
    page.select_option("#csv-value-column", "3")  # the user's choice: the crew numbers, no timestamps
    page.select_option("#csv-time-column", "-1")
    assert page.inner_text("#values-count").startswith('80 values from "crew": 0, 1, 2, 0, 1, …, 1')
    page.select_option("#csv-value-column", "2")
    assert page.inner_text("#values-count") == 'Value 1 in column "shift" ("day") is not a number.'
    page.select_option("#csv-value-column", "1")
    page.select_option("#csv-time-column", "0")
    page.select_option("#missing", "pairwise")
    with page.expect_request(lambda r: r.method == "POST") as request:
        page.click("#submit")
    sent = request.value.post_data_json
    assert sent["values"][21] is None and sent["values"][22] == kwh[22] and len(sent["values"]) == 80
    assert sent["timestamps"][:2] == ["2025-01-01T00:00:00", "2025-01-01T01:00:00"] and len(sent["timestamps"]) == 80
    page.wait_for_selector("#result:not([hidden])")
    facts = page.inner_text("#facts")  # 56 observed of 80 hourly readings
    assert "n = 56" in facts and "24 missing" in facts and "period 24 (from timestamps)" in facts
    ticks = page.locator("#time-chart line.miss")  # analysed pairwise: missing values ticked, none ringed
    assert ticks.count() == 24 and page.locator("#time-chart circle.ring").count() == 0
    assert page.locator("#time-legend li").evaluate_all("(l) => l.map((e) => e.dataset.key)") == ["line", "missing"]
    page.screenshot(path=str(shots / "page-table-columns.png"), full_page=True)


def test_keyboard_alone_can_fill_the_form_and_submit(page, live_server):
    page.goto(live_server + "/")
    unlabelled = page.evaluate("""() => [...document.querySelectorAll('input, select, textarea')]
        .filter(e => !e.labels || e.labels.length === 0).map(e => e.id)""")
    assert unlabelled == []
    page.keyboard.press("Tab")  # the skip link
    page.keyboard.press("Tab")
    assert page.evaluate("document.activeElement.id") == "values"
    page.keyboard.type("\n".join(str(v) for v in _demo("farm_shop_short_monthly_residuals")["values"]))
    for _ in range(30):  # tab on to the submit button
        page.keyboard.press("Tab")
        if page.evaluate("document.activeElement.id") == "submit":
            break
    assert page.evaluate("document.activeElement.id") == "submit"
    page.keyboard.press("Enter")
    page.wait_for_selector("#result:not([hidden])")
    assert page.evaluate("document.activeElement.id") == "result"  # focus moves to the result
    assert "n = 24" in page.inner_text("#facts")


@contextmanager
def portal(target: dict):
    """A stand-in portal on its own loopback origin (another port); its page frames ``target["src"]``,
    read at request time so the portal can be started before the service it frames."""

    class Handler(BaseHTTPRequestHandler):
        def do_GET(self):
            html = (f'<!doctype html><title>portal</title><iframe id="f" src="{target["src"]}" width="900" '
                    'height="600"></iframe>').encode()
            self.send_response(200)
            self.send_header("Content-Type", "text/html; charset=utf-8")
            self.send_header("Content-Length", str(len(html)))
            self.end_headers()
            self.wfile.write(html)

        def log_message(self, *args):
            pass

    server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.server_address[1]}"
    finally:
        server.shutdown()
        server.server_close()
        thread.join(timeout=10)


def test_page_refuses_to_be_framed_by_an_origin_not_allowed(browser, live_server):
    context = browser.new_context()
    page = context.new_page()
    with portal({"src": live_server + "/"}) as origin:
        page.goto(origin + "/reports")
        with pytest.raises(Exception, match="Timeout"):
            page.frame_locator("#f").locator("#series-form").wait_for(state="attached", timeout=3000)
        assert page.frames[1].url.startswith("chrome-error:")  # refused by the default frame-ancestors 'self'
    context.close()


def test_page_can_be_framed_by_an_allowed_portal_and_sends_the_token(browser, tmp_path):
    target: dict = {}
    context = browser.new_context()
    page = context.new_page()
    with portal(target) as origin:
        env = {"LAGSIGHT_FRAME_ANCESTORS": f"'self' {origin}", "LAGSIGHT_AUTH_TOKENS": "portal-secret-1"}
        with gunicorn(tmp_path / "framed.log", workers=1, env=env) as base:
            target["src"] = base + "/"
            page.goto(origin + "/reports")
            frame = page.frame_locator("#f")
            frame.locator("#series-form").wait_for(state="attached", timeout=10000)
            frame.locator("#values").fill("1\n3\n2\n5\n4\n6\n5\n8\n7\n9\n8\n11")
            frame.locator("#submit").click()  # this deployment requires a token: the 401 is shown
            frame.locator("#problem").wait_for(state="visible", timeout=10000)
            assert "bearer token" in frame.locator("#problem").inner_text().lower()
            frame.locator("details.access summary").click()
            frame.locator("#token").fill("portal-secret-1")
            frame.locator("#submit").click()
            frame.locator("#result:not([hidden])").wait_for(timeout=10000)
            assert frame.locator("#acf-chart svg rect.bar").count() >= 1
            band = frame.locator("#acf-chart polygon.band").evaluate("(e) => getComputedStyle(e).fill")
            assert band == _rgb(style.BAND_FILL)  # the shared style sheet loaded without the token
    context.close()


# ---------------------------------------------------------------------- the answer: order, charts, style


def _rgb(hex_colour: str) -> str:
    """A hex colour as the browser's computed style writes it."""
    r, g, b = (int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))
    return f"rgb({r}, {g}, {b})"


def expect(locator):
    """Playwright's retrying assertions (imported when a browser test runs, as the browser fixture does)."""
    from playwright.sync_api import expect as playwright_expect

    return playwright_expect(locator)


def _paste(page, text: str) -> None:
    """Put a long text into Values as a paste does (one input event; typing it would take minutes)."""
    page.evaluate("""(text) => { const box = document.getElementById('values'); box.value = text;
        box.dispatchEvent(new Event('input', {bubbles: true})); }""", text)


def _boxes_overlap(boxes: list[dict], gap: float = 0.0) -> list:
    """Pairs of label boxes (getBoundingClientRect) that overlap, in x order."""
    boxes = sorted(boxes, key=lambda b: b["left"])
    return [(a, b) for a, b in zip(boxes, boxes[1:]) if a["right"] + gap > b["left"]]


TICK_BOXES = """(sel) => [...document.querySelectorAll(sel)].map((t) => {
    const r = t.getBoundingClientRect(); const s = t.ownerSVGElement.getBoundingClientRect();
    return {text: t.textContent, left: r.left, right: r.right,
            inside: r.left >= s.left - 0.5 && r.right <= s.right + 0.5};
})"""


def test_verdict_and_advice_come_first_then_charts_then_tests_with_filled_values_ringed(page, live_server, shots):
    payload = _demo("ferry_terminal_daily_gaps")  # six nulls inside the series
    page.goto(live_server + "/")
    page.fill("#values", "\n".join("" if v is None else str(v) for v in payload["values"]))
    page.select_option("#missing", "interpolate")
    with page.expect_response(lambda r: r.url.endswith("/v1/diagnostics")) as response:
        page.click("#submit")
    answer = response.value.json()
    page.wait_for_selector("#result:not([hidden])")
    order = page.evaluate("""() => ['verdict', 'advice', 'time-chart', 'acf-chart', 'pacf-chart', 'tests-table',
        'sentences', 'cautions'].map((id) => document.getElementById(id).getBoundingClientRect().top)""")
    assert order == sorted(order)
    nulls = [i for i, v in enumerate(payload["values"]) if v is None]
    rings = page.locator("#time-chart circle.ring")
    assert [int(rings.nth(i).get_attribute("data-index")) for i in range(rings.count())] == nulls
    assert answer["missing"]["interpolated"] == len(nulls) == 6  # the answer's count of filled values agrees
    assert page.locator("#time-chart path.series").count() == 1 and page.locator("#time-chart line.miss").count() == 0
    assert page.locator("#time-legend li").evaluate_all("(l) => l.map((e) => e.dataset.key)") == ["line", "filled"]
    legend = page.locator("#chart-legend li").evaluate_all("(l) => l.map((e) => e.dataset.key)")
    assert legend[0] == "band" and "seasonal" not in legend  # no period given: no seasonal lags to mark
    assert page.inner_text("#chart-legend li >> nth=0") == "95% " + style.LABELS["band"]
    page.screenshot(path=str(shots / "page-filled-values.png"), full_page=True)


def test_charts_draw_in_the_shared_style_with_a_band_region_bars_and_seasonal_diamonds(page, live_server):
    page.goto(live_server + "/")
    _check(page, _demo("ice_cream_kiosk_daily_residuals"))
    computed = page.evaluate("""() => {
        const fill = (sel) => { const e = document.querySelector(sel); const s = getComputedStyle(e);
            return [s.fill, s.stroke]; };
        return {band: fill('#acf-chart polygon.band'), inside: fill('#acf-chart rect.bar.inside'),
                far: fill('#acf-chart rect.bar.far'), marginal: fill('#acf-chart rect.bar.marginal'),
                seasonal: fill('#acf-chart polygon.mark.seasonal'),
                dashed: [...document.querySelectorAll('#result svg *')].filter(
                    (e) => !['none', ''].includes(getComputedStyle(e).strokeDasharray)).length,
                lines: document.querySelectorAll('#acf-chart line:not(.grid):not(.zero):not(.axis)').length};
    }""")
    assert computed["band"] == [_rgb(style.BAND_FILL), "none"]  # a shaded region, no outline
    assert computed["inside"][0] == _rgb(style.PALETTE["inside"]) and computed["far"][0] == _rgb(style.PALETTE["far"])
    assert computed["marginal"] == [_rgb(style.PALETTE["paper"]), _rgb(style.PALETTE["far"])]  # hollow, outlined
    assert computed["seasonal"][0] == _rgb(style.SEASONAL)
    assert computed["dashed"] == 0 and computed["lines"] == 0  # no dashed band lines, no stems
    seasonal = page.locator("#acf-chart polygon.mark.seasonal")
    assert seasonal.count() == 3  # lags 7, 14 and 21
    ticks = page.evaluate(TICK_BOXES, "#acf-chart .lag-tick")
    assert ticks and all(t["text"].isdigit() for t in ticks) and not _boxes_overlap(ticks)


@pytest.mark.parametrize("width", [1200, 375])
@pytest.mark.parametrize("length,freq", [(12, "D"), (2400, "h"), (1500, "D")],
                         ids=["12-days", "2400-hours", "1500-days"])
def test_date_labels_never_overlap(browser, live_server, width, length, freq):
    import pandas as pd

    stamps = [t.isoformat() for t in pd.date_range("2023-03-01", periods=length, freq=freq)]
    values = np.random.default_rng(length).standard_normal(length).round(3).tolist()
    context = browser.new_context(viewport={"width": width, "height": 900})
    page = context.new_page()
    page.goto(live_server + "/")
    _paste(page, "time,value\n" + "\n".join(f"{s},{v}" for s, v in zip(stamps, values)))
    page.fill("#max-lag", "60" if length > 100 else "")
    page.click("#submit")
    page.wait_for_selector("#result:not([hidden])")
    for selector in ("#time-chart .time-tick", "#acf-chart .lag-tick"):
        boxes = page.evaluate(TICK_BOXES, selector)
        assert len(boxes) >= 2, selector
        assert not _boxes_overlap(boxes, gap=2), (selector, _boxes_overlap(boxes, gap=2))
        assert all(b["inside"] for b in boxes), selector
    assert page.evaluate("document.documentElement.scrollWidth") <= width
    context.close()


# ---------------------------------------------------------------------- downloads and curl


def _download(page, button: str):
    with page.expect_download() as info:
        page.click(button)
    download = info.value
    return download.suggested_filename, Path(download.path()).read_bytes()


def test_downloads_give_the_answer_as_json_csv_svg_and_png(page, live_server):
    from xml.etree import ElementTree

    from lagsight.outputs.csv_table import COLUMNS

    page.goto(live_server + "/")
    with page.expect_response(lambda r: r.url.endswith("/v1/diagnostics")) as response:
        _check(page, _demo("bakery_daily_residuals"))
    name, data = _download(page, "#download-json")
    assert name == "lagsight-answer.json" and json.loads(data) == response.value.json()
    name, data = _download(page, "#download-csv")
    lines = data.decode().split("\r\n")
    assert name.endswith(".csv") and lines[0] == ",".join(COLUMNS) and len([x for x in lines if x]) == 1 + 17
    name, data = _download(page, "#download-svg")
    assert name.endswith(".svg") and ElementTree.fromstring(data).tag == "{http://www.w3.org/2000/svg}svg"
    name, data = _download(page, "#download-png")
    assert name.endswith(".png") and data[:8] == b"\x89PNG\r\n\x1a\n"
    expect(page.locator("#download-status")).to_have_text("Saved lagsight-charts.png.")


def test_copy_as_curl_copies_the_exact_request(browser, live_server):
    import shutil
    import subprocess

    assert shutil.which("curl"), "curl is needed to run the copied command"
    context = browser.new_context(permissions=["clipboard-read", "clipboard-write"])
    page = context.new_page()
    page.goto(live_server + "/")
    values = _demo("bakery_daily_residuals")["values"]
    page.select_option("#decimal", ",")  # a decimal-comma paste, with a name that needs shell quoting
    page.fill("#values", "\n".join(f"{v:.2f}".replace(".", ",") for v in values))
    page.fill("#series-name", "bakery's \"north\" branch $HOME")
    page.fill("#period", "7")
    with page.expect_request(lambda r: r.method == "POST") as request:
        page.click("#submit")
    sent = request.value.post_data
    page.wait_for_selector("#result:not([hidden])")
    page.click("#copy-curl")
    expect(page.locator("#download-status")).to_have_text("Copied the request as a curl command.")
    command = page.evaluate("navigator.clipboard.readText()")
    assert command == page.input_value("#curl-text") and command.startswith("curl ")
    assert f"--data-binary '{sent}'" in command.replace("'\\''", "'")  # the body sent, byte for byte
    run = subprocess.run(["bash", "-c", command], capture_output=True, text=True, timeout=30)
    assert run.returncode == 0, run.stderr
    with page.expect_request(lambda r: r.method == "POST") as again:
        page.click("#submit")
    assert again.value.post_data == sent
    page.wait_for_selector("#result:not([hidden])")
    assert json.loads(run.stdout) == json.loads(page.evaluate("() => fetch('v1/diagnostics', {method: 'POST', "
                                                              "headers: {'Content-Type': 'application/json'}, "
                                                              f"body: {json.dumps(sent)}}}).then(r => r.text())"))
    assert json.loads(run.stdout)["name"] == "bakery's \"north\" branch $HOME"
    context.close()


# ---------------------------------------------------------------------- keyboard and phone width

CONTROLS = """() => [...document.querySelectorAll('#result *, #follow *')].filter((e) => e.offsetParent !== null)
    .filter((e) => e.tabIndex >= 0 || e.onclick || getComputedStyle(e).cursor === 'pointer')
    .map((e) => [e.tagName.toLowerCase(), e.id || e.textContent.trim().slice(0, 20)])"""


def test_the_answer_is_keyboard_usable_with_visible_focus(page, live_server):
    page.goto(live_server + "/")
    _check(page, _demo("bakery_daily_residuals"))
    assert page.evaluate("document.activeElement.id") == "result"
    controls = page.evaluate(CONTROLS)
    assert {tag for tag, _ in controls} <= {"button", "input", "textarea", "summary", "a", "select"}, controls
    unlabelled = page.evaluate("""() => [...document.querySelectorAll(
        '#result input, #result textarea, #follow input, #follow textarea')]
        .filter((e) => !e.labels || !e.labels.length).map((e) => e.id)""")
    assert unlabelled == []
    order = []
    for _ in range(12):  # from the result, Tab reaches the downloads in reading order
        page.keyboard.press("Tab")
        order.append(page.evaluate("document.activeElement.id"))
        if order[-1] == "copy-curl":
            break
    assert order[:5] == ["download-json", "download-csv", "download-svg", "download-png", "copy-curl"]
    outline = page.evaluate("""() => { const s = getComputedStyle(document.activeElement);
        return [s.outlineStyle, parseFloat(s.outlineWidth)]; }""")
    assert outline[0] != "none" and outline[1] >= 2  # focus is visible
    for _ in range(3):  # back to the CSV button; Enter downloads
        page.keyboard.press("Shift+Tab")
    assert page.evaluate("document.activeElement.id") == "download-csv"
    with page.expect_download() as info:
        page.keyboard.press("Enter")
    assert info.value.suggested_filename == "lagsight-correlogram.csv"
    for _ in range(30):  # on to the follow-up steps; Space presses a button
        page.keyboard.press("Tab")
        if page.evaluate("document.activeElement.id") == "model-run":
            break
    assert page.evaluate("document.activeElement.id") == "model-run"
    page.keyboard.press(" ")
    page.locator("#model-out h4").wait_for()
    assert page.inner_text("#model-out h4").startswith("Fitted: ")


def test_phone_width_reads_without_sideways_scrolling(browser, live_server, shots):
    """375 px wide (a small phone): a decimal-comma paste through to the answer and a stability check."""
    context = browser.new_context(viewport={"width": 375, "height": 800}, device_scale_factor=2, is_mobile=True,
                                  has_touch=True)
    page = context.new_page()
    payload = _demo("bus_line_daily_boardings_stability")
    page.goto(live_server + "/")
    assert page.evaluate("document.documentElement.scrollWidth") <= 375
    page.fill("#values", " ".join(f"{v:.1f}".replace(".", ",") for v in payload["values"]))
    page.locator("#reading-options button", has_text="(decimal comma)").click()
    assert page.inner_text("#values-count").startswith("280 values, read with decimal comma: ")
    page.click("#submit")
    page.wait_for_selector("#result:not([hidden])")
    assert "n = 280" in page.inner_text("#facts")
    widths = page.evaluate("""() => [...document.querySelectorAll('.chart svg')].map((s) =>
        [s.getBoundingClientRect().width, s.parentElement.clientWidth, s.viewBox.baseVal.width])""")
    for drawn, box, view in widths:  # drawn at the box's width: text keeps its size
        assert drawn <= box + 0.5 and abs(view - box) <= 1
    page.fill("#window", "28")
    page.fill("#step", "7")
    page.click("#stability-run")
    page.locator("#stability-out img").wait_for()
    assert page.evaluate("document.documentElement.scrollWidth") <= 375
    page.screenshot(path=str(shots / "page-phone.png"), full_page=True)
    context.close()


# ---------------------------------------------------------------------- the next steps


def test_the_suggested_model_is_checked_from_the_page(page, live_server, shots):
    page.goto(live_server + "/")
    _check(page, _demo("dairy_daily_milk_intake_model_check"))
    assert page.inner_text("#verdict").startswith("Not white noise")
    with page.expect_request(lambda r: r.url.endswith("/v1/model-check")) as request:
        page.click("#model-run")
    sent = request.value.post_data_json
    assert sent["order"] == "suggested" and "model_df" not in sent and len(sent["values"]) == 182
    page.locator("#model-out h4").wait_for()
    out = page.inner_text("#model-out")
    assert "Fitted: ARIMA(1,0,0)" in out and "took the structure out" in out  # the demo's expectation
    assert "AICc" in out and "ar 1" in out
    page.locator("#model-out").screenshot(path=str(shots / "page-model-check.png"))


def test_a_pasted_driver_is_checked_from_the_page(page, live_server):
    payload = _demo("district_heating_daily_demand_drivers")
    temperature = payload["drivers"][0]  # its dates start 30 days before the series': drop them to line up
    assert temperature["timestamps"][30] == payload["timestamps"][0]
    page.goto(live_server + "/")
    _paste(page, "day,error\n" + "\n".join(f"{t},{v}" for t, v in zip(payload["timestamps"], payload["values"])))
    page.click("#submit")
    page.wait_for_selector("#result:not([hidden])")
    page.fill("#driver-name", "temperature")
    page.fill("#driver-values", "\n".join(str(v) for v in temperature["values"][30:30 + len(payload["values"])]))
    page.click("#driver-run")
    page.locator("#driver-out dl").wait_for()
    out = page.inner_text("#driver-out")
    assert "temperature still moves with the series" in out and "driver leading" in out
    assert "lags that stand out\n1" in out.replace("\t", "\n")
    page.fill("#driver-values", "1\n2\nx")
    page.click("#driver-run")
    page.locator("#problem").wait_for(state="visible")
    assert 'Driver value 3 ("x") is not a number.' in page.inner_text("#problem")


def test_stability_over_windows_is_read_and_drawn_on_the_page(page, live_server, shots):
    payload = _demo("bus_line_daily_boardings_stability")
    page.goto(live_server + "/")
    _paste(page, "day,error\n" + "\n".join(f"{t},{v}" for t, v in zip(payload["timestamps"], payload["values"])))
    page.click("#submit")
    page.wait_for_selector("#result:not([hidden])")
    assert page.input_value("#window") == "56"  # a fifth of the series by default
    page.fill("#window", "28")
    page.fill("#step", "7")
    page.click("#stability-run")
    image = page.locator("#stability-out img")
    image.wait_for()
    out = page.inner_text("#stability-out")
    assert "The structure changed near 2025-06-23" in out  # the demo's expectation: the new timetable
    assert "37 windows of 28 values, a new one every 7" in out and "28 of 37" in out
    page.wait_for_function("() => document.querySelector('#stability-out img').naturalWidth > 300")
    assert "structure changed" in image.get_attribute("alt")
    page.locator("#follow").screenshot(path=str(shots / "page-stability.png"))
