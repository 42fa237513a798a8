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
    context.close()
