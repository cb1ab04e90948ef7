"""Authentication: argon2id cost, cookies, CSRF, logout, password change, timeouts, tokens."""

from __future__ import annotations

import re

import pytest
from api_helpers import PASSWORD
from fastapi.testclient import TestClient
from pydantic import ValidationError

from porecast.services.auth import OWASP_MINIMUM, password_hasher
from porecast.settings import DEFAULT_SECRET, Settings


def _login(client: TestClient, username: str = "owner", password: str = PASSWORD):
    return client.post("/api/auth/login", json={"username": username, "password": password})


def _cookie_client(app, base_url: str = "http://testserver") -> TestClient:
    client = TestClient(app, base_url=base_url)
    r = _login(client)
    assert r.status_code == 200, r.text
    client.headers["X-CSRF-Token"] = r.json()["csrf_token"]
    return client


def _set_cookie_headers(response) -> dict[str, str]:
    return {h.split("=", 1)[0]: h for h in response.headers.get_list("set-cookie")}


def test_production_argon2id_parameters_meet_owasp_minimum():
    # OWASP Password Storage Cheat Sheet: argon2id with m >= 19 MiB, t >= 2, p >= 1;
    # the production profile is RFC 9106's second recommendation (m=64 MiB, t=3, p=4).
    encoded = password_hasher("production").hash("a long enough passphrase")
    m = re.match(r"^\$argon2id\$v=19\$m=(\d+),t=(\d+),p=(\d+)\$", encoded)
    assert m, encoded
    memory, time_cost, lanes = map(int, m.groups())
    assert (memory, time_cost, lanes) == (65536, 3, 4)
    assert memory >= OWASP_MINIMUM["memory_cost"] and time_cost >= OWASP_MINIMUM["time_cost"]
    assert password_hasher("production").verify(encoded, "a long enough passphrase")


def test_cookie_flags(app, team):
    r = _login(TestClient(app))
    cookies = _set_cookie_headers(r)
    session, csrf = cookies["porecast_session"], cookies["porecast_csrf"]
    assert "HttpOnly" in session and "samesite=lax" in session.lower()
    assert "HttpOnly" not in csrf and "samesite=lax" in csrf.lower()
    assert "Secure" not in session  # plain http test server
    r = _login(TestClient(app, base_url="https://testserver"))
    assert "Secure" in _set_cookie_headers(r)["porecast_session"]


def test_cookie_secure_setting(settings, connection, clock, team, make_app):
    app = make_app(settings.model_copy(update={"cookie_secure": True}), connection, clock)
    r = _login(TestClient(app))
    assert "Secure" in _set_cookie_headers(r)["porecast_session"]


def test_csrf_required_for_cookie_authenticated_unsafe_requests(app, team):
    client = _cookie_client(app)
    token = client.headers.pop("X-CSRF-Token")
    assert client.get("/api/projects").status_code == 200  # safe method: no token needed
    assert client.post("/api/projects", json={"name": "x"}).status_code == 403
    r = client.post("/api/projects", json={"name": "x"}, headers={"X-CSRF-Token": "0" * 64})
    assert r.status_code == 403
    r = client.post("/api/projects", json={"name": "x"}, headers={"X-CSRF-Token": token})
    assert r.status_code == 201
    # bearer tokens need no CSRF token
    assert team["owner"].post("/api/projects", json={"name": "y"}).status_code == 201


def test_wrong_password_and_unknown_user_look_alike(app, team):
    a = _login(TestClient(app), password="wrong password!!")
    b = _login(TestClient(app), username="nobody")
    assert a.status_code == b.status_code == 401
    assert a.json()["detail"] == b.json()["detail"]


def test_failed_logins_are_rate_limited_then_recover(app, team, settings, clock):
    client = TestClient(app)
    for _ in range(settings.login_max_failures):
        assert _login(client, password="wrong password!!").status_code == 401
    r = _login(client)  # right password, but the name is locked for the window
    assert r.status_code == 429 and int(r.headers["Retry-After"]) > 0
    clock.advance(seconds=settings.login_window_seconds + 1)
    assert _login(client).status_code == 200


def test_logout_ends_the_session(app, team):
    client = _cookie_client(app)
    cookie = client.cookies.get("porecast_session")
    assert client.post("/api/auth/logout").status_code == 204
    replay = TestClient(app, cookies={"porecast_session": cookie})
    assert replay.get("/api/auth/me").status_code == 401


def test_password_change_ends_other_sessions(app, team):
    here, elsewhere = _cookie_client(app), _cookie_client(app)
    r = here.post("/api/auth/password", json={"current_password": PASSWORD,
                                               "new_password": "a brand new passphrase"})
    assert r.status_code == 204, r.text
    assert elsewhere.get("/api/auth/me").status_code == 401
    here.headers["X-CSRF-Token"] = here.cookies.get("porecast_csrf")
    assert here.get("/api/auth/me").status_code == 200  # this browser got a new session
    assert _login(TestClient(app)).status_code == 401
    assert _login(TestClient(app), password="a brand new passphrase").status_code == 200


def test_password_policy_minimum_length(app, team):
    client = _cookie_client(app)
    r = client.post("/api/auth/password", json={"current_password": PASSWORD,
                                                 "new_password": "short-11ch"})
    assert r.status_code == 422
    r = team["admin"].post("/api/users", json={"username": "u2", "password": "11 chars ok"})
    assert r.status_code == 422
    r = team["admin"].post("/api/users", json={"username": "u2", "password": "twelve chars"})
    assert r.status_code == 201


def test_idle_timeout(app, team, settings, clock):
    client = _cookie_client(app)
    clock.advance(minutes=settings.session_idle_minutes - 1)
    assert client.get("/api/auth/me").status_code == 200
    clock.advance(minutes=settings.session_idle_minutes - 1)  # activity moved the deadline
    assert client.get("/api/auth/me").status_code == 200
    clock.advance(minutes=settings.session_idle_minutes + 1)
    assert client.get("/api/auth/me").status_code == 401


def test_absolute_timeout_despite_activity(app, team, settings, clock):
    client = _cookie_client(app)
    step = settings.session_idle_minutes / 2
    elapsed = 0.0
    while elapsed + step < settings.session_absolute_hours * 60:
        clock.advance(minutes=step)
        elapsed += step
        assert client.get("/api/auth/me").status_code == 200
    clock.advance(minutes=settings.session_absolute_hours * 60 - elapsed + 1)
    assert client.get("/api/auth/me").status_code == 401


def test_api_tokens_revoke_and_expire(app, team, clock):
    owner = team["owner"]
    r = owner.post("/api/auth/tokens", json={"name": "nightly", "expires_days": 1})
    assert r.status_code == 201
    raw, token_id = r.json()["token"], r.json()["id"]
    script = TestClient(app, headers={"Authorization": f"Bearer {raw}"})
    assert script.get("/api/auth/me").json()["username"] == "owner"
    assert all("token" not in t for t in owner.get("/api/auth/tokens").json())
    clock.advance(days=1, seconds=1)
    assert script.get("/api/auth/me").status_code == 401
    assert owner.delete(f"/api/auth/tokens/{token_id}").status_code == 204
    assert TestClient(app, headers={"Authorization": "Bearer pct_bogus"}).get(
        "/api/auth/me").status_code == 401


def test_settings_refuse_default_secret_outside_local_use(tmp_path):
    with pytest.raises(ValidationError, match="SECRET_KEY"):
        Settings(environment="production", data_dir=tmp_path)
    with pytest.raises(ValidationError, match="32 characters"):
        Settings(environment="production", data_dir=tmp_path, secret_key="short")
    ok = Settings(environment="production", data_dir=tmp_path, secret_key="x" * 40)
    assert ok.secret_key.get_secret_value() != DEFAULT_SECRET
    with pytest.raises(ValidationError, match="only in tests"):
        Settings(environment="local", password_hash_profile="test-fast")
