"""Requests refused before any handler runs, and the security headers on every answer, over real HTTP on loopback.

Outside references for the protocol facts checked:
- ``Host`` identifies the server name the client asked for (RFC 9110 §7.2); answering only one's own
  names is the standard defence against DNS rebinding (common practice, no single source);
- ``Sec-Fetch-Site`` / ``-Mode`` / ``-Dest`` are the browser's fetch metadata (W3C Fetch Metadata
  Request Headers, §2): an ``<img>`` from a foreign page sends ``cross-site``, ``no-cors``, ``image``;
- framing protection: ``X-Frame-Options`` (RFC 7034) and CSP ``frame-ancestors`` (W3C CSP Level 3);
- gzip content coding: RFC 9110 §8.4.1.3.
"""

from __future__ import annotations

import gzip
import http.client
import logging
import sys
from pathlib import Path
from urllib.parse import urlsplit

import pytest
from tornado.httputil import HTTPHeaders

from gainboard.app.request_guard import CONTENT_SECURITY_POLICY, redacted_uri, refusal_reason
from gainboard.app.snapshot import snapshot_url

sys.path.insert(0, str(Path(__file__).resolve().parent / "browser"))
from workbench_server import RunningServer  # noqa: E402

ALLOWED = {"127.0.0.1:5006", "localhost:5006"}


def test_a_foreign_host_name_is_refused_and_our_own_names_pass():
    assert refusal_reason("GET", HTTPHeaders({"Host": "127.0.0.1:5006"}), ALLOWED) == ""
    assert refusal_reason("GET", HTTPHeaders({"Host": "LOCALHOST:5006"}), ALLOWED) == ""  # host names ignore case
    assert "rebound.example" in refusal_reason("GET", HTTPHeaders({"Host": "rebound.example:5006"}), ALLOWED)
    assert refusal_reason("GET", HTTPHeaders({"Host": "127.0.0.1:5007"}), ALLOWED)  # another port is another name
    assert refusal_reason("GET", HTTPHeaders({}), ALLOWED)  # HTTP/1.1 requires Host (RFC 9110 §7.2)


def test_cross_site_subresources_and_posts_are_refused_but_a_clicked_link_opens():
    own = {"Host": "127.0.0.1:5006"}
    image = {**own, "Sec-Fetch-Site": "cross-site", "Sec-Fetch-Mode": "no-cors", "Sec-Fetch-Dest": "image"}
    clicked = {**own, "Sec-Fetch-Site": "cross-site", "Sec-Fetch-Mode": "navigate", "Sec-Fetch-Dest": "document"}
    framed = {**clicked, "Sec-Fetch-Dest": "iframe"}
    assert refusal_reason("GET", HTTPHeaders(image), ALLOWED) == "requests from other sites are refused"
    assert refusal_reason("POST", HTTPHeaders(clicked), ALLOWED)  # a sign-in posted from a foreign page
    assert refusal_reason("GET", HTTPHeaders(framed), ALLOWED)
    assert refusal_reason("GET", HTTPHeaders(clicked), ALLOWED) == ""
    for site in ("same-origin", "same-site", "none"):
        assert refusal_reason("POST", HTTPHeaders({**own, "Sec-Fetch-Site": site}), ALLOWED) == ""


def test_secret_and_private_query_values_never_reach_the_log_line():
    assert redacted_uri("/login?token=s3cret&next=%2F%3Froom%3Dlab") == "/login?token=REDACTED&next=%2F%3Froom%3Dlab"
    assert "g1.eNq" not in redacted_uri("/?design=g1.eNqAAAA&room=lab")
    assert redacted_uri("/static/x.js") == "/static/x.js"


@pytest.fixture(scope="module")
def server():
    running = RunningServer("cart_pendulum")
    yield running
    running.stop()


def get(server, path, headers=None, host=None):
    netloc = urlsplit(server.url).netloc
    connection = http.client.HTTPConnection(netloc, timeout=60)
    try:
        connection.putrequest("GET", path, skip_host=True, skip_accept_encoding=True)
        connection.putheader("Host", host or netloc)
        for name, value in (headers or {}).items():
            connection.putheader(name, value)
        connection.endheaders()
        response = connection.getresponse()
        return response.status, response.headers, response.read()
    finally:
        connection.close()


def test_every_answer_carries_framing_protection_and_the_content_security_policy(server):
    for path in ("/", "/static/extensions/panel/panel.min.js", "/no-such-page"):
        status, headers, _ = get(server, path)
        assert headers["X-Frame-Options"] == "DENY", path
        assert headers["Content-Security-Policy"] == CONTENT_SECURITY_POLICY, path
        assert "frame-ancestors 'none'" in headers["Content-Security-Policy"]
        assert headers["X-Content-Type-Options"] == "nosniff" and headers["Referrer-Policy"] == "no-referrer"


def test_a_rebound_host_name_and_a_foreign_image_of_a_snapshot_link_are_refused_before_evaluation(server):
    from gainboard import core
    from gainboard.app.design_file import Design

    link = snapshot_url(server.url, Design(plant=core.Plant(A=[[-1.0]], B=[[1.0]]), gain=[[2.0]]))
    path = link[len(server.url) - 1:]
    status, headers, body = get(server, path, host=f"rebound.example:{urlsplit(server.url).port}")
    assert status == 403 and b"not reached under the name rebound.example" in body
    assert headers["X-Frame-Options"] == "DENY"  # refusals carry the headers too
    status, _, body = get(server, path, {"Sec-Fetch-Site": "cross-site", "Sec-Fetch-Mode": "no-cors",
                                         "Sec-Fetch-Dest": "image"})
    assert status == 403 and b"other sites" in body
    status, _, _ = get(server, path)
    assert status == 200


def test_pages_are_compressed_for_browsers_that_accept_gzip(server):
    status, headers, body = get(server, "/static/extensions/panel/panel.min.js", {"Accept-Encoding": "gzip"})
    assert status == 200 and headers.get("Content-Encoding") == "gzip"
    plain_status, _, plain = get(server, "/static/extensions/panel/panel.min.js")
    assert gzip.decompress(body) == plain and len(body) < len(plain) / 2


def test_a_wrong_token_is_written_to_the_access_log_redacted():
    password = Path(__file__).resolve().parent / "data" / "third_order_reference.toml"  # any plant
    running = RunningServer(str(password), options=["--require-login", "--token"])
    try:
        status, _, _ = get(running, "/login?token=guessed-secret-value")
        assert status == 403
        running_log = running.log()
        assert "guessed-secret-value" not in running_log
        assert "token=REDACTED" in running_log  # the line is there, without the value
        assert running.sign_in_url.split("token=")[1] not in running_log
    finally:
        running.stop()


def test_tornado_still_asks_the_application_for_each_handler():
    """guard_application wraps Application.find_handler; this fails if Tornado stops calling it."""
    import inspect

    from tornado import routing

    assert "self.router.find_handler(" in inspect.getsource(routing._RoutingDelegate.headers_received)
    assert logging.getLogger("tornado.access")  # the logger our log function writes to
