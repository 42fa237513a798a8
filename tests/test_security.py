"""Security headers, CORS allow-list, frame-ancestors and optional bearer-token auth."""
from __future__ import annotations

import pytest

from lagsight import create_app
from lagsight.web.security import frame_policy, read_tokens, token_matches

from .spec_tools import assert_valid

URL = "/v1/diagnostics"
BODY = {"values": [1, 3, 2, 5, 4, 6, 3, 2]}


def _app(**cfg):
    return create_app({"TESTING": True, **cfg})


@pytest.mark.parametrize("method,path,kwargs", [
    ("get", "/healthz", {}),
    ("post", URL, {"json": BODY}),
    ("post", URL, {"data": "{", "content_type": "application/json"}),  # 400
    ("post", URL, {"data": "a,b", "content_type": "text/plain"}),  # 415
    ("get", "/no/such/route", {}),  # 404
    ("delete", "/healthz", {}),  # 405
])
def test_security_headers_on_every_response_including_errors(client, method, path, kwargs):
    r = getattr(client, method)(path, **kwargs)
    h = r.headers
    assert h["X-Content-Type-Options"] == "nosniff" and h["Referrer-Policy"] == "no-referrer"
    assert h["Cache-Control"] == "no-store" and h["X-Frame-Options"] == "SAMEORIGIN"
    assert h["Content-Security-Policy"] == "default-src 'none'; frame-ancestors 'self'"
    assert "Access-Control-Allow-Origin" not in h  # no CORS by default
    if r.status_code >= 400:
        assert r.mimetype == "application/problem+json"
        assert_valid(r.get_json(), "Problem")


def test_frame_ancestors_is_configurable():
    r = _app(FRAME_ANCESTORS="'self' https://portal.example").test_client().get("/healthz")
    assert r.headers["Content-Security-Policy"].endswith("frame-ancestors 'self' https://portal.example")
    assert "X-Frame-Options" not in r.headers  # it cannot express an allow-list; CSP governs
    r = _app(FRAME_ANCESTORS="'none'").test_client().get("/healthz")
    assert r.headers["X-Frame-Options"] == "DENY"


def test_frame_policy_keeps_a_views_own_policy_and_replaces_its_frame_ancestors():
    own = "default-src 'self'; script-src 'self'; frame-ancestors 'none'"
    assert frame_policy("https://p.example", own, html=True) == (
        "default-src 'self'; script-src 'self'; frame-ancestors https://p.example")
    assert frame_policy("'self'", None, html=True).startswith("default-src 'self'")


def test_cors_allow_list():
    client = _app(CORS_ORIGINS=("https://portal.example",)).test_client()
    ok = client.post(URL, json=BODY, headers={"Origin": "https://portal.example"})
    assert ok.headers["Access-Control-Allow-Origin"] == "https://portal.example"
    assert "X-Request-ID" in ok.headers["Access-Control-Expose-Headers"] and "Origin" in ok.headers["Vary"]
    other = client.post(URL, json=BODY, headers={"Origin": "https://evil.example"})
    assert other.status_code == 200 and "Access-Control-Allow-Origin" not in other.headers
    pre = client.options(URL, headers={"Origin": "https://portal.example", "Access-Control-Request-Method": "POST",
                                       "Access-Control-Request-Headers": "content-type, authorization"})
    assert pre.status_code == 204 and "POST" in pre.headers["Access-Control-Allow-Methods"]
    assert "Authorization" in pre.headers["Access-Control-Allow-Headers"]
    assert pre.headers["Access-Control-Allow-Origin"] == "https://portal.example"
    denied = client.options(URL, headers={"Origin": "https://evil.example", "Access-Control-Request-Method": "POST"})
    assert "Access-Control-Allow-Origin" not in denied.headers


def test_cors_wildcard():
    r = _app(CORS_ORIGINS=("*",)).test_client().get("/v1/methods", headers={"Origin": "https://any.example"})
    assert r.headers["Access-Control-Allow-Origin"] == "*"


@pytest.fixture
def locked(tmp_path):
    tokens = tmp_path / "tokens"
    tokens.write_text("# team tokens\nfile-token-1\n\n  file-token-2  \n")
    return _app(AUTH_TOKENS=("env-token",), AUTH_TOKENS_FILE=str(tokens)).test_client()


@pytest.mark.parametrize("header,reason", [
    (None, None),
    ("Bearer wrong-token", "invalid_token"),
    ("Basic dXNlcjpwYXNz", None),
    ("Bearer ", None),
    ("bearer file-token-1x", "invalid_token"),
    ("Bearer env-token-but-longer", "invalid_token"),
    ("Bearer # team tokens", "invalid_token"),
])
def test_auth_refuses_missing_and_wrong_tokens_with_401_problem(locked, header, reason):
    r = locked.post(URL, json=BODY, headers={"Authorization": header} if header else {})
    assert r.status_code == 401 and r.mimetype == "application/problem+json"
    body = r.get_json()
    assert_valid(body, "Problem")
    assert body["type"] == "urn:lagsight:problem:unauthorized" and body["status"] == 401
    challenge = r.headers["WWW-Authenticate"]
    assert challenge.startswith('Bearer realm="lagsight"')
    assert ('error="invalid_token"' in challenge) is (reason == "invalid_token")
    assert r.headers["X-Content-Type-Options"] == "nosniff" and r.headers["X-Request-ID"]


@pytest.mark.parametrize("token", ["env-token", "file-token-1", "file-token-2"])
def test_auth_accepts_tokens_from_the_variable_and_the_file(locked, token):
    r = locked.post(URL, json=BODY, headers={"Authorization": f"Bearer {token}"})
    assert r.status_code == 200
    assert locked.get("/metrics", headers={"Authorization": f"BEARER {token}"}).status_code == 200


def test_auth_leaves_probes_and_the_contract_open_and_guards_the_rest(locked):
    for path in ("/healthz", "/readyz", "/openapi.json"):
        assert locked.get(path).status_code == 200, path
    for path in ("/v1/methods", "/metrics", "/no/such/route"):
        assert locked.get(path).status_code == 401, path
    pre = locked.options(URL, headers={"Origin": "https://p.example", "Access-Control-Request-Method": "POST"})
    assert pre.status_code != 401  # browsers send preflights without credentials


def test_token_file_that_is_empty_stops_start_up(tmp_path):
    empty = tmp_path / "tokens"
    empty.write_text("# nothing yet\n\n")
    with pytest.raises(ValueError, match="holds no token"):
        read_tokens((), str(empty))


def test_token_matching_is_exact():
    digests = read_tokens(("alpha", "beta"), "")
    assert token_matches("alpha", digests) and token_matches("beta", digests)
    for wrong in ("alph", "alphaa", "ALPHA", "", "beta\n", "\udcff"):
        assert not token_matches(wrong, digests)


def _operations():
    from .spec_tools import spec

    for path, item in spec()["paths"].items():
        for method, op in item.items():
            if method in {"get", "post", "put", "patch", "delete"}:
                yield path, method, op


def test_spec_says_which_operations_need_a_token():
    """Public operations declare security: [] and the others document the 401 they answer without a token."""
    from lagsight.web.security import PUBLIC_PATHS

    for path, method, op in _operations():
        if path in PUBLIC_PATHS:
            assert op.get("security") == [], (method, path)
        else:
            assert "security" not in op and "401" in op["responses"], (method, path)


def test_every_protected_operation_answers_401_without_a_token(locked):
    from lagsight.web.security import PUBLIC_PATHS

    for path, method, _ in _operations():
        r = locked.open(path, method=method.upper(), json={"values": [1, 3, 2, 5]} if method == "post" else None)
        assert (r.status_code == 401) is (path not in PUBLIC_PATHS), (method, path, r.status_code)
