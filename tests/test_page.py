"""GET / and its assets: served from the package, same-origin only, framing as configured."""
from __future__ import annotations

import re
from pathlib import Path

import pytest

from lagsight import config, create_app

STATIC = Path(__file__).resolve().parents[1] / "service" / "lagsight" / "static"


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


@pytest.mark.parametrize("name,mimetype", [("page.js", "text/javascript"), ("page.css", "text/css"),
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
    assert "http" not in (STATIC / "page.js").read_text().replace("http://www.w3.org/2000/svg", "")


def test_every_form_control_has_a_label():
    html = (STATIC / "index.html").read_text()
    ids = re.findall(r'<(?:input|select|textarea)[^>]*\bid="([^"]+)"', html)
    labelled = set(re.findall(r'<label[^>]*\bfor="([^"]+)"', html))
    assert ids and set(ids) <= labelled
