"""GET / and its assets: served from the package, same-origin only, framing as configured."""
from __future__ import annotations

import re
from pathlib import Path

import pytest

from lagsight import config, create_app

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
    for script in ("page.js", "reading.js"):
        assert "http" not in (STATIC / script).read_text().replace("http://www.w3.org/2000/svg", "")


def test_every_form_control_has_a_label():
    html = (STATIC / "index.html").read_text()
    ids = re.findall(r'<(?:input|select|textarea)[^>]*\bid="([^"]+)"', html)
    labelled = set(re.findall(r'<label[^>]*\bfor="([^"]+)"', html))
    assert ids and set(ids) <= labelled


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
    css = (STATIC / "page.css").read_text()
    colours = dict(re.findall(r"(--[a-z-]+):\s*(#[0-9a-fA-F]{6})", css))
    fg, bg = (colours.get(c, c) for c in (text, background))
    assert _contrast(fg, bg) >= 4.5, (text, background, round(_contrast(fg, bg), 2))


def test_spike_colours_stand_apart_from_the_band():
    """Non-text graphics need at least 3:1 against what is next to them (WCAG 2.1 SC 1.4.11)."""
    css = (STATIC / "page.css").read_text()
    colours = dict(re.findall(r"(--[a-z-]+):\s*(#[0-9a-fA-F]{6})", css))
    for spike in ("--inside", "--outside"):  # spikes just outside are outlined in --outside
        assert _contrast(colours[spike], colours["--band"]) >= 3.0, spike
        assert _contrast(colours[spike], colours["--paper"]) >= 3.0, spike


def test_spikes_just_outside_are_outlined_in_the_far_colour():
    css = (STATIC / "page.css").read_text()
    rule = re.search(r"\.chart \.spike\.marginal \{([^}]*)\}", css).group(1)
    assert "stroke: var(--outside)" in rule
