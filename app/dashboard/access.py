"""Who may use a served dashboard, and the headers every answer carries.

Installed on the Flask server by ``create_app`` (``before_request`` and ``after_request`` hooks),
so it covers every route: the Dash pages and callbacks, the survey page, downloads, assets.

* **Host**: the ``Host`` header must be an IP address or one of the served names (``localhost``,
  the machine's names, ``--allow-host``). A page on another site whose name an attacker points at
  this machine (DNS rebinding) sends its own name and is refused with 400, even on localhost.
* **Token**: on any address other than loopback, every request needs the access token, generated
  at start (or given by the operator) and printed with the link to share. The link carries it
  once (``?token=...``); the server answers with a cookie (HttpOnly, SameSite=Lax, per port) and
  the same address without the token, as notebook servers do. Without the token, a page asks
  for it (``POST /access``); anything else is 401. The token may also come in an
  ``X-Arcwindow-Token`` header (scripts, the benchmark).
* **State changes** are POSTs (Dash callbacks: uploads, the shortlist, opening a survey target);
  a POST whose ``Origin`` (or ``Referer``) names another site is refused with 403, token or not,
  so another site's page cannot make a viewer's browser change anything, even on localhost.
* **Headers** on every answer: ``X-Frame-Options: DENY`` and ``Content-Security-Policy:
  frame-ancestors 'none'`` (no other site may frame the page), ``X-Content-Type-Options:
  nosniff``, ``Referrer-Policy: same-origin`` (no address of this server, which may carry a view
  or, once, the token, is sent to another site; "no-referrer" would make browsers send
  ``Origin: null`` with the token form's POST, which the origin check refuses).
* **Body size**: request bodies above :data:`MAX_REQUEST_BODY_BYTES` are refused with 413.
"""

from __future__ import annotations

import hmac
import html
import ipaddress
import secrets
import socket
from collections.abc import Iterable
from dataclasses import dataclass
from urllib.parse import urlencode, urlsplit

from flask import Flask, Response, redirect, request

TOKEN_PARAM = "token"
TOKEN_HEADER = "X-Arcwindow-Token"
ACCESS_PATH = "/access"
MIN_TOKEN_CHARS = 16
MAX_REQUEST_BODY_BYTES = 1024 * 1024
"""Largest request body, bytes: a case upload (256 KiB of TOML, a third more as base64) with the
callback's other values fits with room to spare; nothing the page sends is larger."""

SECURITY_HEADERS = {
    "X-Frame-Options": "DENY",
    "Content-Security-Policy": "frame-ancestors 'none'",
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "same-origin",
}
_SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
# Requests of scripts and of the page's own code get a plain 401; pages get the token form.
_API_PREFIXES = ("/_dash-", "/_reload-hash", "/_favicon", "/assets/", "/download/")
_LOOPBACK_NAMES = frozenset({"localhost", "localhost.localdomain", "ip6-localhost"})


def is_loopback(host: str) -> bool:
    """Whether binding to ``host`` serves this machine only (127.0.0.0/8, ::1, localhost)."""
    name = host.strip().strip("[]").lower()
    if name in _LOOPBACK_NAMES:
        return True
    try:
        return ipaddress.ip_address(name).is_loopback
    except ValueError:
        return False


def new_token() -> str:
    """A fresh access token: 32 random bytes, URL-safe text (43 characters)."""
    return secrets.token_urlsafe(32)


@dataclass(frozen=True)
class AccessPolicy:
    """What a server accepts.

    Attributes
    ----------
    token : str or None
        The access token every request must carry; None: no token (a loopback server).
    hosts : frozenset of str
        Host names accepted in the ``Host`` header (lower case, no port); IP addresses are
        always accepted (a rebinding attack needs a name).
    cookie_name : str
        The cookie that carries the token (one per port: two servers on one machine do not
        overwrite each other's).
    """

    token: str | None
    hosts: frozenset[str]
    cookie_name: str = "arcwindow_token"

    @classmethod
    def for_address(
        cls,
        host: str,
        port: int,
        *,
        token: str | None = None,
        allow_hosts: Iterable[str] = (),
    ) -> AccessPolicy:
        """The policy of a server bound to ``host:port``.

        Loopback: no token unless one is given. Any other address: the given token, else a new
        one. Accepted names: localhost, the bound name, ``allow_hosts`` and, off loopback, the
        machine's host name and fully qualified name.
        """
        names = set(_LOOPBACK_NAMES)
        names.update(h.strip().lower() for h in allow_hosts if h.strip())
        bound = host.strip().strip("[]").lower()
        if bound and bound not in ("0.0.0.0", "::"):
            names.add(bound)
        loopback = is_loopback(host)
        if not loopback:
            for name in (socket.gethostname(), socket.getfqdn()):
                if name:
                    names.add(name.lower())
            token = token or new_token()
        if token is not None and len(token) < MIN_TOKEN_CHARS:
            raise ValueError(f"an access token of at least {MIN_TOKEN_CHARS} characters")
        return cls(token=token, hosts=frozenset(names), cookie_name=f"arcwindow_token_{port}")

    def host_allowed(self, host_header: str) -> bool:
        """Whether a ``Host`` header (``name[:port]``, ``[v6]:port``) names this server."""
        host = host_header.strip().lower()
        if host.startswith("["):
            name = host[1 : host.find("]")] if "]" in host else ""
        else:
            name = host.rsplit(":", 1)[0] if host.count(":") == 1 else host
        if not name:
            return False
        try:
            ipaddress.ip_address(name)
            return True
        except ValueError:
            return name.rstrip(".") in self.hosts

    def token_matches(self, supplied: str | None) -> bool:
        if self.token is None:
            return True
        if not supplied:
            return False
        return hmac.compare_digest(supplied.encode(), self.token.encode())

    def share_link(self, base_url: str) -> str:
        """The link to hand to the team: the address with the token, once."""
        if self.token is None:
            return base_url
        return f"{base_url}?{urlencode({TOKEN_PARAM: self.token})}"


def install(server: Flask, policy: AccessPolicy) -> None:
    """Check every request against ``policy`` and add the security headers to every answer."""
    server.config["MAX_CONTENT_LENGTH"] = MAX_REQUEST_BODY_BYTES
    server.config["ARCWINDOW_ACCESS"] = policy

    @server.before_request
    def _check_request():
        if not policy.host_allowed(request.host):
            return _plain("This server does not serve that host name.", 400)
        if request.method not in _SAFE_METHODS and not _same_origin():
            return _plain("Refused: the request came from another site.", 403)
        if policy.token is None:
            return None
        if request.path == ACCESS_PATH:
            return _access_form_answer(policy)
        from_link = request.args.get(TOKEN_PARAM)
        if from_link is not None and policy.token_matches(from_link):
            # The token leaves the address bar (and history) at once; the cookie carries it on.
            if request.method in ("GET", "HEAD"):
                query = [(k, v) for k, v in request.args.items(multi=True) if k != TOKEN_PARAM]
                target = request.path + (f"?{urlencode(query)}" if query else "")
                return _with_cookie(redirect(target, 303), policy)
            return None
        supplied = request.headers.get(TOKEN_HEADER) or request.cookies.get(policy.cookie_name)
        if policy.token_matches(supplied):
            return None
        if request.method == "GET" and not request.path.startswith(_API_PREFIXES):
            return _token_page(request.full_path.rstrip("?"), status=401)
        return _plain("This arcwindow session needs its access token.", 401)

    @server.after_request
    def _add_headers(response: Response) -> Response:
        for name, value in SECURITY_HEADERS.items():
            response.headers.setdefault(name, value)
        return response


def _same_origin() -> bool:
    """A state-changing request from this server's own pages (or from no browser page at all)."""
    origin = request.headers.get("Origin")
    if origin is None or origin == "null":
        referer = request.headers.get("Referer")
        if not referer:
            return origin is None  # scripts send neither; a sandboxed page sends "null"
        origin = referer
    parts = urlsplit(origin)
    return parts.scheme in ("http", "https") and parts.netloc.lower() == request.host.lower()


def _access_form_answer(policy: AccessPolicy):
    target = _local_path(request.values.get("next", "/"))
    if request.method == "POST":
        if policy.token_matches(request.form.get(TOKEN_PARAM, "").strip()):
            return _with_cookie(redirect(target, 303), policy)
        return _token_page(target, status=401, wrong=True)
    return _token_page(target, status=401)


def _local_path(target: str) -> str:
    """Only a path on this server (never ``//other.site`` or a full address)."""
    parts = urlsplit(target or "/")
    if parts.scheme or parts.netloc or not parts.path.startswith("/"):
        return "/"
    return parts.path + (f"?{parts.query}" if parts.query else "")


def _with_cookie(response, policy: AccessPolicy):
    response.set_cookie(
        policy.cookie_name,
        policy.token or "",
        httponly=True,
        samesite="Lax",
        path="/",
        secure=request.is_secure,
    )
    response.headers["Cache-Control"] = "no-store"
    return response


def _plain(text: str, status: int) -> Response:
    response = Response(text + "\n", status=status, mimetype="text/plain")
    response.headers["Cache-Control"] = "no-store"
    return response


def _token_page(next_path: str, *, status: int, wrong: bool = False) -> Response:
    """The one page shown without the token: a form that asks for it."""
    message = '<p class="wrong">That is not this session\'s token.</p>' if wrong else ""
    body = f"""<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>arcwindow: access token</title>
<meta name="viewport" content="width=device-width, initial-scale=1">
<style>
body {{ font-family: system-ui, sans-serif; max-width: 34rem; margin: 4rem auto; padding: 0 1rem;
  color: #1d2733; }}
input {{ font: inherit; width: 100%; padding: .4rem; box-sizing: border-box; }}
button {{ font: inherit; margin-top: .8rem; padding: .4rem 1.2rem; }}
.wrong {{ color: #9b1c1c; }}
</style></head><body>
<h1>arcwindow</h1>
<p>This shared session needs its access token. Open the link that <code>arcwindow serve</code>
printed when it started (it carries the token), or paste the token here.</p>
{message}
<form method="post" action="{ACCESS_PATH}">
<input type="hidden" name="next" value="{html.escape(next_path)}">
<label for="token">access token</label>
<input id="token" name="{TOKEN_PARAM}" type="password" autocomplete="off" autofocus required>
<button type="submit">Open</button>
</form></body></html>
"""
    response = Response(body, status=status, mimetype="text/html")
    response.headers["Cache-Control"] = "no-store"
    return response


__all__ = [
    "ACCESS_PATH",
    "MAX_REQUEST_BODY_BYTES",
    "MIN_TOKEN_CHARS",
    "SECURITY_HEADERS",
    "TOKEN_HEADER",
    "TOKEN_PARAM",
    "AccessPolicy",
    "install",
    "is_loopback",
    "new_token",
]
