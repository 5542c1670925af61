"""The one set of security headers, on every response (pages, API, errors)."""

from __future__ import annotations

from .asgi import ASGIApp, Message, Receive, Scope, Send

#: Scripts only from this origin: no inline script, no eval. Plotly and Swagger UI set
#: inline styles from script, which needs 'unsafe-inline' for styles (not for scripts).
CSP = (
    "default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; "
    "img-src 'self' data: blob:; font-src 'self'; connect-src 'self'; object-src 'none'; "
    "base-uri 'self'; form-action 'self'; frame-ancestors 'none'"
)
SECURITY_HEADERS = {
    "Content-Security-Policy": CSP,
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    "Referrer-Policy": "same-origin",
    "Permissions-Policy": "camera=(), microphone=(), geolocation=(), payment=(), usb=()",
    "Cross-Origin-Opener-Policy": "same-origin",
}


class SecurityHeaders:
    """Add :data:`SECURITY_HEADERS` to every HTTP response that does not set its own."""

    def __init__(self, app: ASGIApp, headers: dict[str, str] | None = None) -> None:
        self.app = app
        # Encoded once: this runs on every response.
        self.raw = [
            (name.lower().encode("latin-1"), value.encode("latin-1"))
            for name, value in (headers or SECURITY_HEADERS).items()
        ]

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return

        async def send_with_headers(message: Message) -> None:
            if message["type"] == "http.response.start":
                headers = list(message.get("headers", ()))
                present = {name.lower() for name, _ in headers}
                headers.extend(h for h in self.raw if h[0] not in present)
                message["headers"] = headers
            await send(message)

        await self.app(scope, receive, send_with_headers)
