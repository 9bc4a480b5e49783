"""Who may open the workbench: loopback without a login, other addresses only with one.

``gainboard serve`` listens on the loopback address by default, which only this
machine can reach, and asks for no login there. Listening on any other address
lets other machines connect, so it needs a shared secret — a password, a generated
access token, or both — and refuses to start without one (:func:`access_settings`
raises :class:`AccessError`, which the command line reports on one line, exit 2).

- Password: read from a file (``--password-file``) or the ``GAINBOARD_PASSWORD``
  environment variable, never from the command line (other users could read it
  in the process list). At least :data:`MIN_PASSWORD_LENGTH` characters.
- Access token: ``--token`` generates a random token at each start and prints a
  ready-to-share link ``http://HOST:PORT/login?token=...`` that signs in whoever
  opens it.

Signing in sets a signed cookie (named ``user``, holding a random sign-in id and the
name the person gave, shown to teammates in live rooms) that lasts :data:`LOGIN_DAYS`
day; signing out revokes its id on the server, so a copy of the cookie kept elsewhere
no longer signs in (revocations live in the memory of one server process). The cookie is
signed with the cookie secret, from ``--cookie-secret-file`` or
``GAINBOARD_COOKIE_SECRET`` or generated at each start (then a restart signs
everyone out). Several server processes given the same cookie secret accept each
other's sign-ins on the same host name. The live connection of a page is refused
(HTTP 403) without a valid cookie, and wrong secrets are answered after a pause to
slow down guessing. Attempts are limited (:class:`SignInLimiter`): after
:data:`FREE_FAILURES` wrong secrets from one client address, or
:data:`FREE_FAILURES_ALL` from all clients together, further attempts are answered
429 without being checked until a wait has passed, which doubles with each further
failure up to :data:`LONGEST_WAIT` seconds; a right secret clears that client's
count. The login page is served by this module with no external resources, so it
works in air-gapped labs.

A password from ``$GAINBOARD_PASSWORD`` is stripped of surrounding white space like
the first line of a password file (``export GAINBOARD_PASSWORD=" secret "`` and a file
holding `` secret `` both give ``secret``).
"""

from __future__ import annotations

import asyncio
import hmac
import ipaddress
import os
import secrets
import socket
import threading
import time
from dataclasses import dataclass
from html import escape
from pathlib import Path
from urllib.parse import quote, urlsplit

from bokeh.server.auth_provider import AuthProvider
from tornado.web import RequestHandler

from gainboard import core

__all__ = [
    "AccessError",
    "AccessSettings",
    "WorkbenchLogin",
    "access_settings",
    "is_loopback",
    "share_url",
    "clean_display_name",
    "PASSWORD_VARIABLE",
    "COOKIE_SECRET_VARIABLE",
    "MIN_PASSWORD_LENGTH",
    "LOGIN_PATH",
    "LOGOUT_PATH",
    "USER_COOKIE",
    "LOGIN_DAYS",
    "SignInLimiter",
    "FREE_FAILURES",
    "FREE_FAILURES_ALL",
    "LONGEST_WAIT",
    "name_from_cookie",
]

#: Environment variable holding the password (instead of --password-file).
PASSWORD_VARIABLE = "GAINBOARD_PASSWORD"
#: Environment variable holding the cookie secret (instead of --cookie-secret-file).
COOKIE_SECRET_VARIABLE = "GAINBOARD_COOKIE_SECRET"
#: Shortest password accepted.
MIN_PASSWORD_LENGTH = 8
#: Shortest cookie secret accepted (a generated one has 43 characters).
MIN_COOKIE_SECRET_LENGTH = 32
LOGIN_PATH = "/login"
LOGOUT_PATH = "/logout"
#: Cookie holding the signed-in name; Panel reads the same cookie for ``pn.state.user``.
USER_COOKIE = "user"
#: How long a sign-in lasts, in days.
LOGIN_DAYS = 1
#: Pause before answering a wrong password or token, in seconds.
WRONG_SECRET_PAUSE = 1.0
#: Longest name a person may give.
MAX_NAME_LENGTH = 40
#: Wrong secrets one client may send before it has to wait.
FREE_FAILURES = 5
#: Wrong secrets all clients together may send before everyone has to wait (a guesser with many addresses).
FREE_FAILURES_ALL = 50
#: The first wait after the free failures, in seconds; it doubles with each further failure.
FIRST_WAIT = 2.0
#: The longest wait, in seconds.
LONGEST_WAIT = 300.0
#: A count of failures is forgotten after this long without a failure, in seconds.
FORGET_AFTER = 900.0


class SignInLimiter:
    """Counts wrong secrets per client and in all, and says how long an attempt must still wait.

    Parameters
    ----------
    clock : callable, optional
        Seconds from any fixed start (default :func:`time.monotonic`); tests pass their own.

    Examples
    --------
    >>> now = [0.0]
    >>> limiter = SignInLimiter(clock=lambda: now[0])
    >>> for _ in range(FREE_FAILURES):
    ...     limiter.failed("192.0.2.7")
    >>> limiter.wait_for("192.0.2.7"), limiter.wait_for("192.0.2.8")
    (2.0, 0.0)
    >>> now[0] = 2.0
    >>> limiter.wait_for("192.0.2.7")
    0.0
    """

    _ALL = "*all clients*"

    def __init__(self, clock=time.monotonic):
        self._clock = clock
        self._lock = threading.Lock()
        self._failures: dict[str, tuple[int, float]] = {}  # client -> (count, time of the last failure)

    def _wait(self, key: str, free: int, now: float) -> float:
        count, last = self._failures.get(key, (0, 0.0))
        if count < free or now - last > FORGET_AFTER:
            return 0.0
        wait = min(LONGEST_WAIT, FIRST_WAIT * 2.0 ** (count - free))
        return max(0.0, last + wait - now)

    def wait_for(self, client: str) -> float:
        """Seconds ``client`` must still wait before an attempt is checked (0: check it now)."""
        now = self._clock()
        with self._lock:
            return max(self._wait(client, FREE_FAILURES, now), self._wait(self._ALL, FREE_FAILURES_ALL, now))

    def failed(self, client: str) -> None:
        """Record a wrong secret from ``client``."""
        now = self._clock()
        with self._lock:
            for key in (client, self._ALL):
                count, last = self._failures.get(key, (0, now))
                self._failures[key] = (1 if now - last > FORGET_AFTER else count + 1, now)
            if len(self._failures) > 10_000:  # bounded memory under a spray of addresses
                self._failures = {key: value for key, value in self._failures.items()
                                  if now - value[1] <= FORGET_AFTER}

    def succeeded(self, client: str) -> None:
        """A right secret from ``client``: its count starts again."""
        with self._lock:
            self._failures.pop(client, None)


def name_from_cookie(value: str | None) -> str | None:
    """The name a sign-in cookie holds ("<sign-in id>.<name>"), or None.

    Examples
    --------
    >>> name_from_cookie("k3Yq2b7pQ8yS0uZr1f9vXw.Ana Lopez")
    'Ana Lopez'
    """
    if not value or "." not in value:
        return None
    return value.split(".", 1)[1] or "guest"


class AccessError(core.GainboardError):
    """The server cannot start with these access settings; the message says how to fix them."""


def is_loopback(address: str) -> bool:
    """Whether ``address`` is reachable from this machine only (127.0.0.0/8, ::1 or "localhost").

    Examples
    --------
    >>> is_loopback("127.0.0.1"), is_loopback("0.0.0.0"), is_loopback("localhost")
    (True, False, True)
    """
    if address == "localhost":
        return True
    try:
        return ipaddress.ip_address(address).is_loopback
    except ValueError:
        return False


@dataclass(frozen=True, repr=False)
class AccessSettings:
    """How people sign in to a served workbench.

    Attributes
    ----------
    password : str or None
        The shared password, or None.
    token : str or None
        The generated access token, or None.
    cookie_secret : str
        Signs the sign-in cookie.
    """

    password: str | None
    token: str | None
    cookie_secret: str

    def __repr__(self) -> str:  # never print secrets into logs
        return (f"AccessSettings(password={'set' if self.password else None}, "
                f"token={'set' if self.token else None}, cookie_secret=...)")

    def accepts(self, secret: str) -> bool:
        """Whether ``secret`` is the password or the token (compared in constant time)."""
        if not isinstance(secret, str) or not secret:
            return False
        given = secret.encode("utf-8", errors="surrogatepass")
        matched = False
        for expected in (self.password, self.token):
            if expected:
                matched |= hmac.compare_digest(given, expected.encode("utf-8", errors="surrogatepass"))
        return matched

    def accepts_token(self, token: str) -> bool:
        """Whether ``token`` is the access token (constant-time comparison)."""
        return bool(self.token) and isinstance(token, str) and hmac.compare_digest(
            token.encode("utf-8", errors="surrogatepass"), self.token.encode("utf-8"))


def _read_secret_file(path, what: str) -> str:
    try:
        text = Path(path).read_text(encoding="utf-8")
    except OSError as error:
        raise AccessError(f"cannot read the {what} file {str(path)!r}: {error.strerror or error}") from None
    except UnicodeDecodeError:
        raise AccessError(f"the {what} file {str(path)!r} is not UTF-8 text") from None
    lines = text.splitlines()
    secret = lines[0].strip() if lines else ""
    if not secret:
        raise AccessError(f"the {what} file {str(path)!r} is empty; put the {what} on its first line")
    return secret


def access_settings(address: str, *, password_file=None, token: bool = False, cookie_secret_file=None,
                    require_login: bool = False, environ=None) -> AccessSettings | None:
    """Decide how people sign in, or refuse to serve.

    Parameters
    ----------
    address : str
        The address the server listens on.
    password_file : str or path, optional
        A file whose first line is the password (else ``$GAINBOARD_PASSWORD``).
    token : bool
        Generate an access token and share it as a link.
    cookie_secret_file : str or path, optional
        A file whose first line is the cookie secret (else ``$GAINBOARD_COOKIE_SECRET``,
        else one generated now).
    require_login : bool
        Ask for a login even on the loopback address.
    environ : mapping, optional
        The environment to read (default ``os.environ``).

    Returns
    -------
    AccessSettings or None
        None when no login is asked for (loopback, no password, no token).

    Raises
    ------
    AccessError
        For a non-loopback address (or ``require_login``) without a password or
        token, a short password, a short cookie secret or an unreadable file.
    """
    environ = os.environ if environ is None else environ
    if password_file:
        password = _read_secret_file(password_file, "password")
    else:  # stripped like a file's first line: a quoted value with spaces must still sign in
        password = (environ.get(PASSWORD_VARIABLE) or "").strip() or None
    if password is not None and len(password) < MIN_PASSWORD_LENGTH:
        raise AccessError(f"the password has {len(password)} characters; use at least {MIN_PASSWORD_LENGTH}")
    if password is None and not token:
        if not is_loopback(address):
            raise AccessError(
                f"listening on {address} lets other machines connect, so a login is required: add --token to print "
                f"a link with a generated access token to share, or give a password with --password-file FILE or "
                f"the {PASSWORD_VARIABLE} environment variable (or serve on the default loopback address 127.0.0.1)"
            )
        if require_login:
            raise AccessError(
                f"--require-login needs a password (--password-file FILE or {PASSWORD_VARIABLE}) or --token"
            )
        return None
    if cookie_secret_file:
        cookie_secret = _read_secret_file(cookie_secret_file, "cookie secret")
    else:
        cookie_secret = (environ.get(COOKIE_SECRET_VARIABLE) or "").strip() or secrets.token_urlsafe(32)
    if len(cookie_secret) < MIN_COOKIE_SECRET_LENGTH:
        raise AccessError(
            f"the cookie secret has {len(cookie_secret)} characters; use at least {MIN_COOKIE_SECRET_LENGTH} "
            "random ones (for example from `python -c \"import secrets; print(secrets.token_urlsafe(32))\"`)"
        )
    return AccessSettings(password=password, token=secrets.token_urlsafe(24) if token else None,
                          cookie_secret=cookie_secret)


def share_url(address: str, port: int, token: str) -> str:
    """The link that signs in with ``token``: ``http://HOST:PORT/login?token=...``.

    A server listening on every address (0.0.0.0 or ::) is named by this machine's
    host name, which teammates can usually reach.

    Examples
    --------
    >>> share_url("192.168.4.20", 5006, "abc")
    'http://192.168.4.20:5006/login?token=abc'
    """
    host = socket.getfqdn() if address in ("0.0.0.0", "::", "") else address
    if ":" in host:
        host = f"[{host}]"
    return f"http://{host}:{port}{LOGIN_PATH}?token={quote(token, safe='')}"


def clean_display_name(name: str) -> str:
    """A name fit to show to others: printable, single-spaced, at most 40 characters ("" if none).

    Examples
    --------
    >>> clean_display_name("  Ana\\n  Lopez ")
    'Ana Lopez'
    """
    if not isinstance(name, str):
        return ""
    printable = "".join(ch if ch.isprintable() else " " for ch in name)
    return " ".join(printable.split())[:MAX_NAME_LENGTH]


def _safe_next(target: str | None) -> str:
    """Only a path on this server may follow a sign-in (no other host, no scheme)."""
    if not target or not target.startswith("/") or target.startswith("//") or "\\" in target:
        return "/"
    parts = urlsplit(target)
    if parts.scheme or parts.netloc:
        return "/"
    return target


_PAGE_CSS = """
body { font-family: system-ui, sans-serif; background: #f6f5f1; color: #22303c; margin: 0; }
main { max-width: 520px; margin: 48px auto; background: #fff; border: 1px solid #d9d6cc; border-radius: 6px;
  padding: 22px 28px; }
h1 { font-size: 21px; margin: 0 0 4px 0; } h1 span { color: #2f6f8f; font-weight: 600; }
p { font-size: 14px; line-height: 1.45; }
label { display: block; font-size: 13px; font-weight: 600; margin: 12px 0 4px 0; }
input[type=text], input[type=password] { width: 100%; box-sizing: border-box; font-size: 15px; padding: 6px 8px;
  border: 1px solid #b9b5aa; border-radius: 4px; }
button { margin-top: 16px; font-size: 15px; padding: 7px 18px; background: #2f6f8f; color: #fff; border: 0;
  border-radius: 4px; cursor: pointer; }
.error { background: #fbe4e1; border-left: 5px solid #b3261e; color: #5c1510; padding: 6px 10px; font-size: 14px; }
.caution { border-left: 5px solid #c98a1b; background: #fbf3e2; padding: 6px 10px; font-size: 12.5px;
  line-height: 1.4; color: #4a3b1c; margin-top: 18px; }
.small { font-size: 12.5px; color: #5d6b78; }
"""


def _page(title: str, body: str) -> str:
    from .theme import SAFETY_CAUTION

    return (
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
        f"<title>{escape(title)}</title><style>{_PAGE_CSS}</style></head><body><main>"
        f"{body}<div class=\"caution\" role=\"note\"><b>Caution:</b> {escape(SAFETY_CAUTION)}</div>"
        "</main></body></html>"
    )


def login_page(settings: AccessSettings, next_url: str = "/", error: str = "", name: str = "") -> str:
    """The sign-in page (HTML, no external resources)."""
    if settings.password and settings.token:
        ask, field = "the team password or the access token", "Password or access token"
    elif settings.password:
        ask, field = "the team password", "Team password"
    else:
        ask, field = "the access token from the link the person running the server shared", "Access token"
    notice = f'<p class="error" role="alert">{escape(error)}</p>' if error else ""
    body = (
        '<h1>gainboard <span>workbench</span></h1>'
        "<p>This workbench is shared over the network, so it asks who you are. "
        f"Enter {ask}.</p>{notice}"
        f'<form method="post" action="{LOGIN_PATH}">'
        f'<input type="hidden" name="next" value="{escape(next_url, quote=True)}">'
        '<label for="gb-name">Your name (shown to teammates in live rooms)</label>'
        f'<input type="text" id="gb-name" name="name" maxlength="{MAX_NAME_LENGTH}" autocomplete="nickname" '
        f'value="{escape(name, quote=True)}">'
        f'<label for="gb-secret">{field}</label>'
        '<input type="password" id="gb-secret" name="secret" autocomplete="current-password" required autofocus>'
        '<button type="submit">Sign in</button></form>'
    )
    return _page("gainboard: sign in", body)


class _AccessHandler(RequestHandler):
    provider: "WorkbenchLogin"  # set on the subclass made for each server

    def set_default_headers(self) -> None:
        self.set_header("Cache-Control", "no-store")
        self.set_header("X-Frame-Options", "DENY")
        self.set_header("Content-Type", "text/html; charset=UTF-8")

    def _sign_in(self, name: str) -> None:
        self.provider.limiter.succeeded(self.request.remote_ip)
        value = f"{secrets.token_urlsafe(16)}.{name or 'guest'}"
        self.set_secure_cookie(USER_COOKIE, value, expires_days=LOGIN_DAYS, httponly=True, samesite="Lax", path="/")

    async def _refused_for_now(self, next_url: str, name: str = "") -> bool:
        """Answer 429 if this client (or everyone) must wait; True when answered."""
        wait = self.provider.limiter.wait_for(self.request.remote_ip)
        if wait <= 0:
            return False
        self.set_status(429)
        self.set_header("Retry-After", str(int(wait) + 1))
        self.write(login_page(self.provider.access, next_url,
                              f"Too many wrong attempts; wait {int(wait) + 1} s before trying again.", name))
        return True

    async def _wrong(self, next_url: str, error: str, name: str = "") -> None:
        self.provider.limiter.failed(self.request.remote_ip)
        await asyncio.sleep(WRONG_SECRET_PAUSE)
        self.set_status(403)
        self.write(login_page(self.provider.access, next_url, error, name))


class _LoginHandler(_AccessHandler):
    async def get(self) -> None:
        settings = self.provider.access
        next_url = _safe_next(self.get_argument("next", "/"))
        token = self.get_argument("token", "")
        if token:
            if await self._refused_for_now(next_url):
                return
            if settings.accepts_token(token):
                self._sign_in(clean_display_name(self.get_argument("name", "")))
                self.redirect(next_url)
                return
            await self._wrong(next_url, "That access link is not valid (the server may have been restarted with a "
                                        "new token); ask for a new link.")
            return
        self.write(login_page(settings, next_url))

    async def post(self) -> None:
        settings = self.provider.access
        next_url = _safe_next(self.get_argument("next", "/"))
        name = clean_display_name(self.get_argument("name", ""))
        if await self._refused_for_now(next_url, name):
            return
        if settings.accepts(self.get_argument("secret", "")):
            self._sign_in(name)
            self.redirect(next_url)
            return
        await self._wrong(next_url, "That password or token is not right.", name)


class _LogoutHandler(_AccessHandler):
    def get(self) -> None:
        value = self.get_secure_cookie(USER_COOKIE, max_age_days=LOGIN_DAYS)
        if value:
            self.provider.revoke(value.decode("utf-8", errors="replace"))
        self.clear_cookie(USER_COOKIE, path="/")
        self.write(_page("gainboard: signed out",
                         f'<h1>gainboard <span>workbench</span></h1><p>You are signed out.</p>'
                         f'<p><a href="{LOGIN_PATH}">Sign in again</a></p>'))


class WorkbenchLogin(AuthProvider):
    """The Bokeh auth provider for our sign-in page and cookie.

    Parameters
    ----------
    settings : AccessSettings
    """

    def __init__(self, settings: AccessSettings, clock=time.monotonic):
        self.access = settings
        self.limiter = SignInLimiter(clock)
        self._clock = clock
        self._revoked: dict[str, float] = {}  # sign-in id -> when it was revoked
        self._revoked_lock = threading.Lock()
        self._login = type("LoginHandler", (_LoginHandler,), {"provider": self})
        self._logout = type("LogoutHandler", (_LogoutHandler,), {"provider": self})
        super().__init__()

    def revoke(self, cookie_value: str) -> None:
        """Refuse the sign-in this cookie value carries from now on (signing out)."""
        sign_in_id = cookie_value.split(".", 1)[0]
        now = self._clock()
        with self._revoked_lock:
            # a cookie expires after LOGIN_DAYS anyway: older revocations need not be kept
            self._revoked = {key: when for key, when in self._revoked.items() if now - when < LOGIN_DAYS * 86400}
            self._revoked[sign_in_id] = now

    def user_of(self, cookie_value: str | None) -> str | None:
        """The signed-in name of a (verified) cookie value, or None if it is malformed or revoked."""
        name = name_from_cookie(cookie_value)
        if name is None:
            return None
        with self._revoked_lock:
            revoked = cookie_value.split(".", 1)[0] in self._revoked
        return None if revoked else name

    @property
    def get_user(self):
        def current_user(handler):
            value = handler.get_secure_cookie(USER_COOKIE, max_age_days=LOGIN_DAYS)
            return self.user_of(value.decode("utf-8", errors="replace")) if value else None

        return current_user

    @property
    def login_url(self):
        return LOGIN_PATH

    @property
    def login_handler(self):
        return self._login

    @property
    def logout_url(self):
        return LOGOUT_PATH

    @property
    def logout_handler(self):
        return self._logout
