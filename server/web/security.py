"""Guards for a web app that runs on the user's own machine.

A local server is reachable from any page the user's browser opens, so:
- the Host header must name this machine (defeats DNS rebinding: a hostile name that resolves
  to 127.0.0.1 still carries its own name in Host);
- a state-changing request that says where it comes from (Origin, else Referer) must come from
  this server's own origin (defeats cross-site form posts);
- request bodies are capped, and every response carries headers that forbid framing, MIME
  sniffing and scripts or styles from anywhere but this server.

Written as plain ASGI middleware (not BaseHTTPMiddleware) so the body cap can count bytes as
they stream in.
"""

from __future__ import annotations

import json
from collections.abc import Iterable
from urllib.parse import urlsplit

from starlette.datastructures import Headers
from starlette.exceptions import HTTPException
from starlette.types import ASGIApp, Message, Receive, Scope, Send

MAX_BODY_BYTES = 20 * 1024 * 1024
LOOPBACK_HOSTS = frozenset({"localhost", "127.0.0.1", "[::1]"})
UNSAFE_METHODS = frozenset({"POST", "PUT", "PATCH", "DELETE"})

CONTENT_SECURITY_POLICY = "; ".join(
    [
        "default-src 'self'",
        "script-src 'self'",
        "style-src 'self'",
        "img-src 'self' data:",
        "font-src 'self'",
        "connect-src 'self'",
        "object-src 'none'",
        "base-uri 'self'",
        "form-action 'self'",
        "frame-ancestors 'none'",
    ]
)
SECURITY_HEADERS = [
    (b"x-content-type-options", b"nosniff"),
    (b"x-frame-options", b"DENY"),
    (b"content-security-policy", CONTENT_SECURITY_POLICY.encode()),
    (b"referrer-policy", b"same-origin"),
]
SECURITY_HEADER_NAMES = frozenset(name for name, _ in SECURITY_HEADERS)


def normalise_host(host: str) -> str:
    """Lower-case host name; a bare IPv6 address gets its brackets (``::1`` -> ``[::1]``)."""
    host = host.strip().lower().rstrip(".")
    if ":" in host and not host.startswith("["):
        host = f"[{host}]"
    return host


def split_host_port(value: str) -> tuple[str, int | None]:
    """Split a Host header value (``name``, ``name:port``, ``[v6]`` or ``[v6]:port``).

    Raises ValueError when the port is not a number.
    """
    value = value.strip()
    if value.startswith("["):
        end = value.find("]")
        if end < 0:
            raise ValueError("unclosed IPv6 bracket")
        host, rest = value[: end + 1], value[end + 1 :]
        if not rest:
            return normalise_host(host), None
        if not rest.startswith(":"):
            raise ValueError("junk after IPv6 address")
        return normalise_host(host), int(rest[1:])
    if ":" in value:
        host, port = value.rsplit(":", 1)
        return normalise_host(host), int(port)
    return normalise_host(value), None


def allowed_hosts_for(bound_host: str, extra_hosts: Iterable[str] = ()) -> frozenset[str]:
    """The names this server answers to: the bound host, loopback names and any extras."""
    names = {normalise_host(bound_host), *LOOPBACK_HOSTS}
    names.update(normalise_host(h) for h in extra_hosts)
    return frozenset(names)


class SecurityMiddleware:
    """Host check, same-origin check on unsafe methods, body cap and security headers."""

    def __init__(
        self,
        app: ASGIApp,
        *,
        allowed_hosts: frozenset[str],
        max_body_bytes: int = MAX_BODY_BYTES,
    ) -> None:
        self.app = app
        self.allowed_hosts = allowed_hosts
        self.max_body_bytes = max_body_bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return

        async def send_with_headers(message: Message) -> None:
            if message["type"] == "http.response.start":
                headers = [
                    (k, v)
                    for k, v in message.get("headers", [])
                    if k.lower() not in SECURITY_HEADER_NAMES
                ]
                message = {**message, "headers": headers + SECURITY_HEADERS}
            await send(message)

        headers = Headers(scope=scope)
        refusal = self.check_request(scope, headers)
        if refusal is not None:
            status, text = refusal
            await send_error(send_with_headers, scope, status, text)
            return

        length = headers.get("content-length")
        too_large_text = self.too_large_text(headers.get("content-type", ""))
        declared_too_large = (
            length is not None and length.isdigit() and int(length) > self.max_body_bytes
        )
        received = 0
        started = False

        # BodyTooLarge is an HTTPException: it passes FastAPI's body parsing unchanged and
        # reaches the app's error handlers, which answer 413 in the requester's usual form
        # (JSON, flash fragment or page); caught below if it escapes them.
        async def receive_capped() -> Message:
            nonlocal received
            if declared_too_large:
                raise BodyTooLarge(too_large_text)  # before reading a byte of it
            message = await receive()
            if message["type"] == "http.request":
                received += len(message.get("body", b""))
                if received > self.max_body_bytes:
                    raise BodyTooLarge(too_large_text)
            return message

        async def send_tracking(message: Message) -> None:
            nonlocal started
            if message["type"] == "http.response.start":
                started = True
            await send_with_headers(message)

        try:
            await self.app(scope, receive_capped, send_tracking)
        except BodyTooLarge as exc:
            if started:
                raise
            await send_error(send_with_headers, scope, 413, exc.detail)

    def too_large_text(self, content_type: str = "") -> str:
        """The 413 message; a file upload (multipart form) is named as such."""
        limit = self.max_body_bytes
        shown = f"{limit / 1048576:g} MB" if limit >= 1048576 else f"{limit} byte"
        if content_type.lower().startswith("multipart/"):
            return f"the uploaded file is larger than the {shown} limit for uploads"
        return f"request body is larger than the {shown} limit"

    def check_request(self, scope: Scope, headers: Headers) -> tuple[int, str] | None:
        """(status, message) when the request must be refused, else None."""
        host_header = headers.get("host")
        if not host_header:
            return 400, "missing Host header"
        try:
            host, port = split_host_port(host_header)
        except ValueError:
            return 400, "malformed Host header"
        if host not in self.allowed_hosts:
            return 400, (
                f"this server answers to {', '.join(sorted(self.allowed_hosts))} only, "
                f"not to {host!r}"
            )
        if scope["method"] in UNSAFE_METHODS:
            scheme = scope.get("scheme", "http")
            request_port = port if port is not None else default_port(scheme)
            source = headers.get("origin") or headers.get("referer")
            if source is not None and not self.is_own_origin(source, request_port):
                return 403, "cross-origin request refused: send it from this server's own pages"
        return None

    def is_own_origin(self, url: str, request_port: int) -> bool:
        """Whether an Origin or Referer URL names this server (same host set, same port)."""
        try:
            parts = urlsplit(url.strip())
            scheme = parts.scheme.lower()
            if scheme not in {"http", "https"} or not parts.netloc:
                return False  # includes Origin: null
            host, port = split_host_port(parts.netloc.rsplit("@", 1)[-1])
        except ValueError:
            return False
        if port is None:
            port = default_port(scheme)
        return host in self.allowed_hosts and port == request_port


class BodyTooLarge(HTTPException):
    """Raised while reading a request body that exceeds the cap."""

    def __init__(self, text: str) -> None:
        super().__init__(status_code=413, detail=text)


def default_port(scheme: str) -> int:
    return 443 if scheme == "https" else 80


async def send_error(send: Send, scope: Scope, status: int, text: str) -> None:
    """Answer before the app runs: JSON for /api paths, a short plain page otherwise."""
    if scope.get("path", "").startswith("/api"):
        body = json.dumps({"detail": text}).encode()
        content_type = b"application/json"
    else:
        body = f"{status}: {text}\n".encode()
        content_type = b"text/plain; charset=utf-8"
    await send(
        {
            "type": "http.response.start",
            "status": status,
            "headers": [
                (b"content-type", content_type),
                (b"content-length", str(len(body)).encode()),
            ],
        }
    )
    await send({"type": "http.response.body", "body": body})
