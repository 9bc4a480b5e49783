"""What every HTTP request to a served workbench passes before any handler runs, and what every answer carries.

Before a handler (the page, its live connection, the sign-in page, static files):

- **Host check.** A request whose ``Host`` header is not one of this server's own
  ``HOST:PORT`` names (the same list as the allowed websocket origins) is refused with
  403. This closes DNS rebinding: a foreign page whose name was made to point at
  127.0.0.1 reaches the server under its own name, which is not on the list.
- **Fetch-site check.** A browser tells in ``Sec-Fetch-Site`` whether a request comes
  from another site. Cross-site requests are refused, except a top-level GET
  navigation to a page (``Sec-Fetch-Mode: navigate``, ``Sec-Fetch-Dest: document``):
  that is a person clicking a shared link in a chat or mail web page, which must open
  (and beyond loopback it still meets the sign-in). This refuses an ``<img>`` or
  ``fetch`` of a snapshot link from a foreign page and a sign-in posted from one.
- **Browser id.** Without a login, autosaves are kept per browser: a page request
  without the ``gainboard_browser`` cookie gets a random one, set on the request before
  the page is built (so the new session reads it) and sent back with the answer.

Every answer carries framing protection (``X-Frame-Options: DENY`` and CSP
``frame-ancestors 'none'``), a content security policy that admits only this server's
own scripts, styles, images, fonts and live connection (Bokeh and Panel put their
document and start-up code in inline scripts and Bokeh compiles some of its code at run
time, so ``'unsafe-inline'`` and ``'unsafe-eval'`` are needed for scripts, and Panel's
module loader fetches and runs its bundled modules as ``blob:`` URLs, so ``blob:`` is
admitted for scripts and fetches; nothing from another origin is admitted — measured in
Chromium: without ``blob:`` the page stays blank), ``X-Content-Type-Options: nosniff`` and
``Referrer-Policy: no-referrer`` (a snapshot link in the address bar is never sent
elsewhere).

Access log lines are written with secret or private query values (access tokens,
snapshot designs) replaced by ``REDACTED``.
"""

from __future__ import annotations

import logging
import re
import secrets

from tornado.web import OutputTransform, RequestHandler

__all__ = [
    "BROWSER_COOKIE",
    "CONTENT_SECURITY_POLICY",
    "SECURITY_HEADERS",
    "guard_application",
    "redacted_uri",
    "refusal_reason",
]

#: Cookie naming this browser (only used to keep autosaves apart when nobody signs in).
BROWSER_COOKIE = "gainboard_browser"
#: Query parameters whose values never reach a log.
REDACTED_PARAMETERS = frozenset({"token", "design", "secret", "password"})
_SECRET_VALUE = re.compile(r"(?i)(?<![^&;])(" + "|".join(sorted(REDACTED_PARAMETERS)) + r")=[^&;]*")
_BROWSER_ID = re.compile(r"[A-Za-z0-9_-]{16,64}")

CONTENT_SECURITY_POLICY = "; ".join([
    "default-src 'self'",
    "script-src 'self' 'unsafe-inline' 'unsafe-eval' blob:",
    "style-src 'self' 'unsafe-inline'",
    "img-src 'self' data: blob:",
    "font-src 'self' data:",
    "connect-src 'self' blob:",
    "worker-src 'self' blob:",
    "object-src 'none'",
    "base-uri 'self'",
    "form-action 'self'",
    "frame-ancestors 'none'",
])
SECURITY_HEADERS = {
    "Content-Security-Policy": CONTENT_SECURITY_POLICY,
    "X-Frame-Options": "DENY",
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "no-referrer",
}

access_log = logging.getLogger("tornado.access")


def refusal_reason(method: str, headers, allowed_hosts) -> str:
    """Why a request must be refused before any handler runs ("" when it may pass).

    Parameters
    ----------
    method : str
        The HTTP method.
    headers : mapping
        The request headers (case-insensitive mapping, as Tornado's).
    allowed_hosts : collection of str
        This server's own ``HOST:PORT`` names, lower case.

    Examples
    --------
    >>> allowed = {"127.0.0.1:5006"}
    >>> refusal_reason("GET", {"Host": "127.0.0.1:5006"}, allowed)
    ''
    >>> refusal_reason("GET", {"Host": "rebound.example:5006"}, allowed)
    'this server is not reached under the name rebound.example:5006'
    >>> refusal_reason("GET", {"Host": "127.0.0.1:5006", "Sec-Fetch-Site": "cross-site",
    ...                        "Sec-Fetch-Mode": "no-cors", "Sec-Fetch-Dest": "image"}, allowed)
    'requests from other sites are refused'
    """
    host = (headers.get("Host") or "").strip().lower()
    if host not in allowed_hosts:
        shown = "".join(ch for ch in host[:80] if ch.isprintable()) or "(none)"
        return f"this server is not reached under the name {shown}"
    if (headers.get("Sec-Fetch-Site") or "").lower() == "cross-site":
        navigation = ((headers.get("Sec-Fetch-Mode") or "").lower() == "navigate"
                      and (headers.get("Sec-Fetch-Dest") or "document").lower() == "document")
        if not (navigation and method == "GET"):
            return "requests from other sites are refused"
    return ""


class _RefusedHandler(RequestHandler):
    """Answers a refused request with 403 and one line of text (never runs the workbench)."""

    def initialize(self, reason: str) -> None:
        self.reason = reason

    def prepare(self) -> None:
        self.set_status(403)
        self.set_header("Content-Type", "text/plain; charset=UTF-8")
        self.set_header("Cache-Control", "no-store")
        self.finish(f"gainboard: refused: {self.reason}.\n")

    def check_xsrf_cookie(self) -> None:  # the answer is a refusal anyway
        return


def redacted_uri(uri: str) -> str:
    """``uri`` with the values of secret or private query parameters replaced by ``REDACTED``.

    Examples
    --------
    >>> redacted_uri("/login?token=abc123&next=%2F")
    '/login?token=REDACTED&next=%2F'
    """
    path, mark, query = uri.partition("?")
    if not mark:
        return uri
    return f"{path}?{_SECRET_VALUE.sub(lambda m: f'{m.group(1)}=REDACTED', query)}"


def _log_request(handler: RequestHandler) -> None:
    """Tornado's access log line, with secret query values redacted."""
    status = handler.get_status()
    method = access_log.info if status < 400 else access_log.warning if status < 500 else access_log.error
    request = handler.request
    method("%d %s %s (%s) %.2fms", status, request.method, redacted_uri(request.uri or ""), request.remote_ip,
           1000.0 * request.request_time())


def _ensure_browser_id(request) -> str | None:
    """Give a request without a browser cookie a new id (on the request, so the page sees it); return it."""
    current = request.cookies.get(BROWSER_COOKIE)
    if current is not None and _BROWSER_ID.fullmatch(current.value):
        return None
    new_id = secrets.token_urlsafe(18)
    existing = request.headers.get("Cookie", "")
    request.headers["Cookie"] = f"{existing}; {BROWSER_COOKIE}={new_id}" if existing else f"{BROWSER_COOKIE}={new_id}"
    request.__dict__.pop("_cookies", None)  # Tornado caches the parsed cookies; parse again with the new one
    return new_id


def guard_application(application, allowed_hosts, page_paths=("/",)) -> None:
    """Put the request checks, the security headers and the redacting access log on a Tornado application.

    Parameters
    ----------
    application : tornado.web.Application
        The Bokeh server's application (``server._tornado``).
    allowed_hosts : iterable of str
        This server's own ``HOST:PORT`` names.
    page_paths : iterable of str
        Paths of the workbench pages (a GET of one gets a browser id cookie if it has none).

    Notes
    -----
    Tornado looks up ``find_handler`` on the application for every request (its
    router protocol), so wrapping it on the instance runs the checks before any
    handler is made; ``tests/test_request_guard.py`` fails if Tornado stops doing so.
    """
    allowed = frozenset(host.lower() for host in allowed_hosts)
    pages = frozenset(page_paths)
    find_handler = application.find_handler

    def checked_find_handler(request, **kwargs):
        reason = refusal_reason(request.method or "GET", request.headers, allowed)
        if reason:
            delegate = application.get_handler_delegate(request, _RefusedHandler, {"reason": reason})
        else:
            delegate = find_handler(request, **kwargs)
        # read by _SecurityHeaders when the answer starts
        opens_page = not reason and request.method == "GET" and request.path in pages
        request.gainboard_new_browser_id = _ensure_browser_id(request) if opens_page else None
        return delegate

    application.find_handler = checked_find_handler
    application.settings["log_function"] = _log_request
    application.transforms.append(_SecurityHeaders)


class _SecurityHeaders(OutputTransform):
    """Adds the security headers (and a new browser cookie) to the first chunk of every answer."""

    def __init__(self, request):
        self.new_browser_id = getattr(request, "gainboard_new_browser_id", None)

    def transform_first_chunk(self, status_code, headers, chunk, finishing):
        for name, value in SECURITY_HEADERS.items():
            headers.setdefault(name, value)
        if self.new_browser_id:
            headers.add("Set-Cookie", f"{BROWSER_COOKIE}={self.new_browser_id}; Path=/; Max-Age=31536000; "
                                      "HttpOnly; SameSite=Strict")
        return status_code, headers, chunk
