"""GET / and its assets: served from the package, same-origin only, framing as configured."""
from __future__ import annotations

import re
from pathlib import Path

import pytest

from lagsight import config, create_app
from lagsight.outputs import style

STATIC = Path(__file__).resolve().parents[1] / "service" / "lagsight" / "web" / "static"


def _csp(response) -> dict[str, str]:
    header = response.headers["Content-Security-Policy"]
    return {d.split()[0]: " ".join(d.split()[1:]) for d in (p.strip() for p in header.split(";")) if d}


def test_page_is_html_with_a_same_origin_policy(client):
    r = client.get("/")
    assert r.status_code == 200 and r.mimetype == "text/html"
    assert b"<title>Lagsight" in r.data
    csp = _csp(r)
    assert csp["default-src"] == "'none'"
    for directive in ("script-src", "style-src", "connect-src"):
        assert csp[directive] == "'self'"
    assert csp["frame-ancestors"] == "'self'"  # the default: only this origin may frame the page


def test_frame_ancestors_come_from_the_setting():
    app = create_app({"TESTING": True, "FRAME_ANCESTORS": "'self' https://portal.example"})
    assert _csp(app.test_client().get("/"))["frame-ancestors"] == "'self' https://portal.example"


def test_frame_ancestors_are_read_from_the_environment():
    env = {"LAGSIGHT_FRAME_ANCESTORS": "  'self'   https://portal.example  "}
    assert config.load(environ=env)["FRAME_ANCESTORS"] == "'self' https://portal.example"


@pytest.mark.parametrize("raw", ["'self'; script-src *", "https://a.example, https://b.example", "\"x\""])
def test_frame_ancestors_that_would_break_the_policy_are_refused(raw):
    with pytest.raises(ValueError, match="LAGSIGHT_FRAME_ANCESTORS"):
        config.load(environ={"LAGSIGHT_FRAME_ANCESTORS": raw})


@pytest.mark.parametrize("name,mimetype", [("page.js", "text/javascript"), ("reading.js", "text/javascript"),
                                           ("charts.js", "text/javascript"), ("answer.js", "text/javascript"),
                                           ("page.css", "text/css"),
                                           ("favicon.svg", "image/svg+xml")])
def test_assets_are_served_from_the_package(client, name, mimetype):
    with client.get(f"/static/{name}") as r:
        assert r.status_code == 200 and r.mimetype == mimetype
        assert r.data == (STATIC / name).read_bytes()


def test_missing_asset_is_a_problem_404(client):
    r = client.get("/static/nothing.js")
    assert r.status_code == 404 and r.mimetype == "application/problem+json"


def test_page_loads_nothing_from_another_origin():
    """No CDN, no external font: every src/href in the page and its stylesheet is relative."""
    html = (STATIC / "index.html").read_text()
    css = (STATIC / "page.css").read_text()
    refs = re.findall(r'(?:src|href)="([^"#]+)"', html) + re.findall(r"url\(([^)]+)\)", css)
    assert refs and all(not re.match(r"^(https?:)?//", ref) for ref in refs), refs
    for script in ("page.js", "reading.js", "charts.js", "answer.js"):
        assert "http" not in (STATIC / script).read_text().replace("http://www.w3.org/2000/svg", "")


def test_every_form_control_has_a_label():
    html = (STATIC / "index.html").read_text()
    ids = re.findall(r'<(?:input|select|textarea)[^>]*\bid="([^"]+)"', html)
    labelled = set(re.findall(r'<label[^>]*\bfor="([^"]+)"', html))
    assert ids and set(ids) <= labelled


def _colours() -> dict[str, str]:
    """Every colour the page defines, by custom property: the generated --ls-* ones (outputs/style.py) and
    page.css's own, with page.css's aliases such as ``--ink: var(--ls-ink)`` resolved."""
    css = (STATIC / "page.css").read_text()
    colours = {k: v for k, v in style.variables().items() if v.startswith("#")}
    colours.update(re.findall(r"(--[a-z-]+):\s*(#[0-9a-fA-F]{6})", css))
    for alias, target in re.findall(r"(--[a-z-]+):\s*var\((--[a-z-]+)\)", css):
        colours[alias] = colours[target]
    return colours


def test_the_style_sheet_is_generated_from_the_style_module(client):
    """GET /static/style.css carries every setting of outputs/style.py (the images' definition), value for value."""
    r = client.get("/static/style.css")
    assert r.status_code == 200 and r.mimetype == "text/css"
    served = dict(re.findall(r"(--ls-[a-z-]+):\s*([^;]+);", r.get_data(as_text=True)))
    assert served == style.variables()
    for name, colour in style.PALETTE.items():
        assert served[f"--ls-{name}"] == colour
    assert served["--ls-bar-width"] == f"{style.BAR_WIDTH:g}"
    assert served["--ls-label-band"] == f'"{style.LABELS["band"]}"'
    html = (STATIC / "index.html").read_text()
    assert html.index('href="static/style.css"') < html.index('href="static/page.css"')  # page.css reads its variables


def test_the_style_sheet_needs_no_token_like_the_page_itself():
    app = create_app({"TESTING": True, "AUTH_TOKENS": ("page-style-token-1",)})
    client = app.test_client()
    assert client.post("/v1/diagnostics", json={"values": [1, 3, 2, 5, 4, 6]}).status_code == 401
    for path in ("/", "/static/style.css", "/static/charts.js"):
        with client.get(path) as r:  # a file response streams: close it
            assert r.status_code == 200, path


def test_the_page_draws_only_with_the_shared_style():
    """Chart rules in page.css use --ls-* variables only (no colour of their own), every --ls-* name the page
    reads exists, and nothing is drawn dashed."""
    css = (STATIC / "page.css").read_text()
    charts_js = (STATIC / "charts.js").read_text()
    defined = set(style.variables())
    used = set(re.findall(r"var\((--ls-[a-z-]+)\)", css))
    used |= {f"--ls-{n}" for n in re.findall(r'setting\("([a-z-]+)"\)', charts_js)}
    used |= {f"--ls-label-{k}" for k in style.LABELS}  # the legend reads label-<key> for its keys
    assert used and used <= defined, used - defined
    for rule in (".band", ".bar.inside", ".bar.far", ".bar.marginal", ".mark.seasonal", ".series", ".ring", ".miss"):
        body = re.search(re.escape(rule) + r" \{([^}]*)\}", css).group(1)
        assert "#" not in body and "var(--ls-" in body, rule
    for text in (css, charts_js):
        assert "dasharray" not in text


def _luminance(hex_colour: str) -> float:
    """Relative luminance (WCAG 2.1, definition of relative luminance, sRGB)."""
    rgb = [int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def _contrast(a: str, b: str) -> float:
    """Contrast ratio (L1 + 0.05) / (L2 + 0.05) (WCAG 2.1, definition of contrast ratio)."""
    la, lb = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


def test_contrast_formula_matches_the_published_extremes():
    # WCAG 2.1: black on white is 21:1, a colour on itself 1:1.
    assert _contrast("#000000", "#ffffff") == pytest.approx(21.0)
    assert _contrast("#777777", "#777777") == pytest.approx(1.0)


@pytest.mark.parametrize("text,background", [
    ("--ink", "--paper"), ("--muted", "--paper"), ("--muted", "--wash"), ("--ok-ink", "--ok-bg"),
    ("--no-ink", "--no-bg"), ("--na-ink", "--na-bg"), ("#ffffff", "--accent"), ("--accent", "--paper"),
])
def test_text_colours_meet_wcag_aa_contrast(text, background):
    """Normal-size text needs at least 4.5:1 (WCAG 2.1 success criterion 1.4.3, level AA)."""
    colours = _colours()
    fg, bg = (colours.get(c, c) for c in (text, background))
    assert _contrast(fg, bg) >= 4.5, (text, background, round(_contrast(fg, bg), 2))


@pytest.mark.parametrize("mark", ["--ls-inside", "--ls-far", "--ls-seasonal", "--ls-line", "--ls-filled",
                                  "--ls-missing"])
def test_marks_stand_apart_from_the_band_and_the_paper(mark):
    """Non-text graphics need at least 3:1 against what is next to them (WCAG 2.1 SC 1.4.11). Bars just
    outside the band are outlined in --ls-far."""
    colours = _colours()
    assert _contrast(colours[mark], colours["--ls-paper"]) >= 3.0, mark
    if mark in ("--ls-inside", "--ls-far", "--ls-seasonal"):
        assert _contrast(colours[mark], colours["--ls-band"]) >= 3.0, mark


def test_bars_just_outside_are_hollow_and_outlined_in_the_far_colour():
    css = (STATIC / "page.css").read_text()
    rule = re.search(r"\.bar\.marginal \{([^}]*)\}", css).group(1)
    assert "stroke: var(--ls-far)" in rule and "fill: var(--ls-paper)" in rule
