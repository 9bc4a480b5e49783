"""Who may open a served workbench: refusal without a login, acceptance with one, over real HTTP.

The server here listens on 127.0.0.1 only, with the login forced on (``--require-login``),
since tests must never bind another address; the refusal for a non-loopback address is
checked without binding anything (the command refuses before it starts a server).

Outside references for the protocol facts checked:
- HTTP status codes 302 (redirect), 403 (forbidden) and 101 (switching protocols): RFC 9110 §15
  and RFC 6455 §4.2.2 (a WebSocket handshake is accepted with 101);
- a browser sends an ``Origin`` header with every WebSocket handshake and the server must refuse
  origins it does not serve (RFC 6455 §10.2);
- ``Set-Cookie`` attributes HttpOnly and SameSite: RFC 6265 §4.1 and the cookie SameSite draft
  (common practice for session cookies, no single source).
"""

from __future__ import annotations

import base64
import http.client
import os
import re
import subprocess
import sys
import time
from pathlib import Path
from urllib.parse import urlencode, urlsplit

import pytest

from gainboard.app.access import (
    COOKIE_SECRET_VARIABLE,
    PASSWORD_VARIABLE,
    AccessError,
    _safe_next,
    access_settings,
    clean_display_name,
    is_loopback,
    share_url,
)
from gainboard.app.server import allowed_origins

sys.path.insert(0, str(Path(__file__).resolve().parent / "browser"))
from workbench_server import RunningServer  # noqa: E402

REPOSITORY = Path(__file__).resolve().parents[1]
PLANT = str(REPOSITORY / "tests" / "data" / "third_order_reference.toml")
PASSWORD = "correct horse battery"


# -- deciding on the login, without a server --------------------------------------------------


def run_serve(*arguments, environment=None):
    env = {k: v for k, v in os.environ.items() if k not in (PASSWORD_VARIABLE, COOKIE_SECRET_VARIABLE)}
    env.update(environment or {})
    return subprocess.run([sys.executable, "-m", "gainboard.app.cli", "serve", PLANT, "--no-show", *arguments],
                          capture_output=True, text=True, timeout=120, env=env, cwd=REPOSITORY)


@pytest.mark.parametrize("address", ["0.0.0.0", "192.0.2.10"])  # 192.0.2.0/24 is for documentation (RFC 5737)
def test_serving_beyond_loopback_without_a_login_is_refused_in_one_line_saying_how(address):
    result = run_serve("--address", address)
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert f"listening on {address} lets other machines connect" in lines[0]
    assert "--token" in lines[0] and "--password-file" in lines[0] and PASSWORD_VARIABLE in lines[0]
    assert result.stdout == ""  # nothing was served


def test_asking_for_a_login_without_a_password_or_token_is_refused():
    result = run_serve("--require-login")
    assert result.returncode == 2 and "--require-login needs a password" in result.stderr


def test_a_short_password_is_refused(tmp_path):
    (tmp_path / "password").write_text("short\n")
    result = run_serve("--address", "0.0.0.0", "--password-file", str(tmp_path / "password"))
    assert result.returncode == 2 and "the password has 5 characters; use at least 8" in result.stderr


def test_loopback_needs_no_login_and_other_addresses_do():
    assert access_settings("127.0.0.1", environ={}) is None
    assert access_settings("::1", environ={}) is None
    with pytest.raises(AccessError, match="a login is required"):
        access_settings("10.1.2.3", environ={})
    settings = access_settings("10.1.2.3", environ={PASSWORD_VARIABLE: PASSWORD})
    assert settings.accepts(PASSWORD) and not settings.accepts(PASSWORD + " ") and not settings.accepts("")
    assert settings.token is None and len(settings.cookie_secret) >= 32
    assert "correct" not in repr(settings)  # secrets never reach logs through repr


def test_a_password_file_gives_its_first_line_and_a_token_is_fresh_each_start(tmp_path):
    path = tmp_path / "password"
    path.write_text(f"{PASSWORD}\nsecond line is ignored\n")
    first = access_settings("0.0.0.0", password_file=path, token=True, environ={})
    second = access_settings("0.0.0.0", password_file=path, token=True, environ={})
    assert first.accepts(PASSWORD) and first.accepts(first.token) and not first.accepts(second.token)
    assert first.cookie_secret != second.cookie_secret  # generated per start unless given


def test_a_given_cookie_secret_is_used_and_a_short_one_refused(tmp_path):
    secret = "s" * 40
    settings = access_settings("0.0.0.0", token=True, environ={COOKIE_SECRET_VARIABLE: secret})
    assert settings.cookie_secret == secret
    (tmp_path / "secret").write_text("too-short")
    with pytest.raises(AccessError, match="the cookie secret has 9 characters; use at least 32"):
        access_settings("0.0.0.0", token=True, cookie_secret_file=tmp_path / "secret", environ={})
    with pytest.raises(AccessError, match="cannot read the password file"):
        access_settings("0.0.0.0", password_file=tmp_path / "missing", environ={})


def test_addresses_names_and_links():
    assert is_loopback("127.0.0.1") and is_loopback("127.8.9.10") and is_loopback("::1")
    assert not is_loopback("0.0.0.0") and not is_loopback("192.0.2.10") and not is_loopback("example.org")
    assert share_url("192.0.2.10", 5006, "a/b") == "http://192.0.2.10:5006/login?token=a%2Fb"
    assert clean_display_name("  Ana\tLópez \n") == "Ana López" and clean_display_name("x" * 90) == "x" * 40
    # Only paths on this server may follow a sign-in (no open redirect).
    assert _safe_next("/?room=lab") == "/?room=lab"
    for foreign in ("//evil.example/", "https://evil.example/", "/\\evil.example", "evil"):
        assert _safe_next(foreign) == "/"


def test_live_connections_are_allowed_only_from_this_servers_own_addresses():
    assert allowed_origins("127.0.0.1", 5006) == ["127.0.0.1:5006", "localhost:5006"]
    assert allowed_origins("192.0.2.10", 80) == ["127.0.0.1:80", "192.0.2.10:80", "localhost:80"]
    assert "[::1]:5006" in allowed_origins("::1", 5006)
    # Extra host names (an alias, a proxy) get this port unless they name one.
    extra = allowed_origins("192.0.2.10", 5006, ["bench.lab.example", "proxy.example:443", "2001:db8::7"])
    assert {"bench.lab.example:5006", "proxy.example:443", "[2001:db8::7]:5006"} <= set(extra)
    assert not any(origin.startswith("*") for origin in allowed_origins("0.0.0.0", 5006))  # never "any origin"


# -- over real HTTP on loopback ---------------------------------------------------------------


@pytest.fixture(scope="module")
def guarded_server(tmp_path_factory):
    password_file = tmp_path_factory.mktemp("access") / "password"
    password_file.write_text(PASSWORD + "\n")
    running = RunningServer(PLANT, options=["--require-login", "--password-file", str(password_file), "--token"])
    yield running
    running.stop()


def request(server, method, path, body=None, headers=None):
    netloc = urlsplit(server.url).netloc
    connection = http.client.HTTPConnection(netloc, timeout=60)
    try:
        connection.request(method, path, body=body, headers=headers or {})
        response = connection.getresponse()
        return response.status, dict(response.getheaders()), response.read().decode("utf-8", errors="replace")
    finally:
        connection.close()


def sign_in(server, secret, name="Ana", next_url="/"):
    body = urlencode({"name": name, "secret": secret, "next": next_url})
    return request(server, "POST", "/login", body, {"Content-Type": "application/x-www-form-urlencoded"})


def cookie_of(headers) -> str:
    cookie = headers.get("Set-Cookie", "")
    return cookie.split(";", 1)[0]


def test_the_environment_password_is_stripped_like_the_files_first_line(tmp_path):
    settings = access_settings("0.0.0.0", environ={PASSWORD_VARIABLE: f"  {PASSWORD} \n"})
    assert settings.accepts(PASSWORD)
    (tmp_path / "password").write_text(f"  {PASSWORD} \n")
    from_file = access_settings("0.0.0.0", password_file=tmp_path / "password", environ={})
    assert from_file.password == settings.password == PASSWORD


def test_sign_in_attempts_are_limited_per_client_and_in_all_and_the_limit_releases():
    from gainboard.app.access import FREE_FAILURES, FREE_FAILURES_ALL, LONGEST_WAIT, SignInLimiter

    now = [1000.0]
    limiter = SignInLimiter(clock=lambda: now[0])
    for _ in range(FREE_FAILURES - 1):
        limiter.failed("192.0.2.1")
    assert limiter.wait_for("192.0.2.1") == 0.0  # still free
    limiter.failed("192.0.2.1")
    first_wait = limiter.wait_for("192.0.2.1")
    assert first_wait > 0 and limiter.wait_for("192.0.2.2") == 0.0  # engaged for that client only
    limiter.failed("192.0.2.1")
    assert limiter.wait_for("192.0.2.1") == 2 * first_wait  # backoff doubles
    now[0] += 2 * first_wait
    assert limiter.wait_for("192.0.2.1") == 0.0  # released
    for _ in range(20):
        limiter.failed("192.0.2.1")
    assert limiter.wait_for("192.0.2.1") == LONGEST_WAIT  # capped
    limiter.succeeded("192.0.2.1")
    assert limiter.wait_for("192.0.2.1") == 0.0
    # Many addresses, a few guesses each: the limit over all clients engages for everyone.
    spread = SignInLimiter(clock=lambda: now[0])
    for index in range(FREE_FAILURES_ALL):
        spread.failed(f"198.51.100.{index}")
    assert spread.wait_for("203.0.113.9") > 0
    now[0] += LONGEST_WAIT
    assert spread.wait_for("203.0.113.9") == 0.0


def websocket_handshake(server, cookie="", origin=None, session_token=""):
    """Status of a WebSocket handshake on /ws (101 accepted, RFC 6455 §4.2.2), as the page's script makes it."""
    netloc = urlsplit(server.url).netloc
    headers = {
        "Connection": "Upgrade", "Upgrade": "websocket", "Sec-WebSocket-Version": "13",
        "Sec-WebSocket-Key": base64.b64encode(os.urandom(16)).decode(),
        "Origin": origin or f"http://{netloc}",
    }
    if cookie:
        headers["Cookie"] = cookie
    if session_token:
        headers["Sec-WebSocket-Protocol"] = f"bokeh, {session_token}"
    status, _, _ = request(server, "GET", "/ws", headers=headers)
    return status


def session_token_of(page: str) -> str:
    """The session token the served page hands its script for the live connection."""
    match = re.search(r'"token"\s*:\s*"([^"]+)"', page)
    assert match, "the page carries no session token"
    return match.group(1)


def test_the_page_and_its_live_connection_are_refused_without_signing_in(guarded_server):
    status, headers, _ = request(guarded_server, "GET", "/")
    assert status == 302 and "login" in headers["Location"]  # RFC 9110: redirect to the sign-in page
    assert websocket_handshake(guarded_server) == 403  # no cookie, no live connection


def test_the_sign_in_page_is_our_own_self_contained_page_with_the_caution(guarded_server):
    status, headers, page = request(guarded_server, "GET", "/login")
    assert status == 200 and headers["Cache-Control"] == "no-store"
    assert 'name="secret"' in page and "Your name" in page
    assert "Validate it on the real system" in page and "emergency stops" in page
    assert "https://" not in page and "http://" not in page  # nothing fetched from elsewhere (offline labs)


def test_a_wrong_password_is_refused_after_a_pause(guarded_server):
    started = time.monotonic()
    status, headers, page = sign_in(guarded_server, "not the password")
    assert status == 403 and "Set-Cookie" not in headers
    assert "That password or token is not right." in page
    assert time.monotonic() - started >= 0.9  # slows down guessing


def test_the_password_signs_in_and_opens_the_page_and_its_live_connection(guarded_server):
    status, headers, _ = sign_in(guarded_server, PASSWORD, next_url="/?room=lab")
    assert status == 302 and headers["Location"] == "/?room=lab"
    set_cookie = headers["Set-Cookie"]
    assert set_cookie.startswith("user=") and "HttpOnly" in set_cookie and "SameSite=Lax" in set_cookie
    cookie = cookie_of(headers)
    status, _, page = request(guarded_server, "GET", "/", headers={"Cookie": cookie})
    assert status == 200 and "gainboard workbench" in page
    token = session_token_of(page)
    assert websocket_handshake(guarded_server, cookie, session_token=token) == 101  # RFC 6455: accepted
    # A page from another site may not open the live connection, even with the cookie (RFC 6455 §10.2).
    assert websocket_handshake(guarded_server, cookie, origin="http://evil.example", session_token=token) == 403
    # A forged cookie (not signed with the cookie secret) is no sign-in.
    assert websocket_handshake(guarded_server, "user=Ana", session_token=token) == 403


def test_the_shared_link_signs_in_with_the_token_and_a_wrong_token_does_not(guarded_server):
    link = urlsplit(guarded_server.sign_in_url)
    assert link.hostname == "127.0.0.1" and link.path == "/login" and link.query.startswith("token=")
    status, headers, _ = request(guarded_server, "GET", f"{link.path}?{link.query}")
    assert status == 302 and headers["Location"] == "/" and headers["Set-Cookie"].startswith("user=")
    status, _, page = request(guarded_server, "GET", "/", headers={"Cookie": cookie_of(headers)})
    assert status == 200
    status, headers, page = request(guarded_server, "GET", "/login?token=guessed")
    assert status == 403 and "Set-Cookie" not in headers and "not valid" in page


def test_a_sign_in_never_redirects_to_another_site(guarded_server):
    status, headers, _ = sign_in(guarded_server, PASSWORD, next_url="//evil.example/")
    assert status == 302 and headers["Location"] == "/"


def test_too_many_wrong_secrets_are_answered_429_without_being_checked():
    from gainboard.app.access import FREE_FAILURES

    running = RunningServer(PLANT, options=["--require-login", "--token"])
    try:
        statuses = []
        for _ in range(FREE_FAILURES):
            statuses.append(request(running, "GET", "/login?token=guessed")[0])
        status, headers, page = request(running, "GET", f"/login?{urlsplit(running.sign_in_url).query}")
        assert statuses == [403] * FREE_FAILURES
        assert status == 429 and int(headers["Retry-After"]) >= 1 and "Too many wrong attempts" in page
        assert "Set-Cookie" not in headers  # even the right token waits: it was not checked
    finally:
        running.stop()


def test_a_signed_out_cookie_is_refused_afterwards(guarded_server):
    _, headers, _ = sign_in(guarded_server, PASSWORD)
    cookie = cookie_of(headers)
    assert request(guarded_server, "GET", "/", headers={"Cookie": cookie})[0] == 200
    status, headers, _ = request(guarded_server, "GET", "/logout", headers={"Cookie": cookie})
    assert status == 200
    status, headers, _ = request(guarded_server, "GET", "/", headers={"Cookie": cookie})  # a kept copy
    assert status == 302 and "login" in headers["Location"]
    assert websocket_handshake(guarded_server, cookie) == 403


def test_signing_out_clears_the_cookie_and_the_server_logged_no_error(guarded_server):
    status, headers, page = request(guarded_server, "GET", "/logout")
    assert status == 200 and "You are signed out" in page
    assert headers["Set-Cookie"].startswith('user=""') or "expires=" in headers["Set-Cookie"].lower()
    assert "Traceback" not in guarded_server.log()


def test_live_connections_send_small_frames_without_waiting():
    """Nagle's algorithm off on every workbench websocket (the latency fix of the speed issue).

    Tornado's documentation recommends ``set_nodelay(True)`` for interactive websockets
    (from memory); the browser benchmark's floor page went from 69 to 36 ms with it.
    """
    from bokeh.server.views.ws import WSHandler

    from gainboard.app.server import send_small_messages_at_once

    send_small_messages_at_once()
    send_small_messages_at_once()  # idempotent: wrapping twice would call set_nodelay twice
    calls = []

    class ReachedBokeh(Exception):
        pass

    class Connection:  # records set_nodelay, then stops where Bokeh's own open() begins
        def set_nodelay(self, value):
            calls.append(value)

        def __getattr__(self, name):
            raise ReachedBokeh(name)

    with pytest.raises(ReachedBokeh):
        WSHandler.open(Connection())
    assert calls == [True]


def test_building_the_server_exempts_start_up_objects_from_garbage_collection():
    """What exists at start-up is frozen, so a full collection walks only newer objects.

    gc.freeze is the standard library's way to do this (Python documentation of the gc
    module); the measured pause it avoids is in keep_garbage_collection_short's docstring.
    """
    import gc

    from gainboard.app.server import keep_garbage_collection_short

    try:
        keep_garbage_collection_short()
        frozen = gc.get_freeze_count()
        assert frozen > 1000  # the libraries' own objects at least
        made_after = [[index] for index in range(1000)]  # new containers are not frozen
        assert gc.get_freeze_count() == frozen and gc.is_tracked(made_after)
    finally:
        gc.unfreeze()
