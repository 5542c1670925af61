"""Security through the real app: headers, API keys, CORS, rate limit, body limit, uploads,
saved-result ids and delete tokens, and the API documentation page."""

from __future__ import annotations

import hmac
import json
import os
import re
import tempfile
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest
from fastapi.responses import PlainTextResponse
from fastapi.testclient import TestClient

from service.app import create_app
from service.config import Settings
from service.http import security
from service.http.security import RateLimit, key_matches, needs_api_key

PROBLEM = "application/problem+json"
FOLD = {"sample_rate_hz": 1000, "tones": [{"label": "a", "freq_hz": 700}]}
SAVE = {"kind": "fold", "request": FOLD, "title": "bench"}

ClientFactory = Callable[..., TestClient]


@pytest.fixture
def make_client(tmp_path: Path) -> Iterator[ClientFactory]:
    clients: list[TestClient] = []

    def make(raise_server_exceptions: bool = True, **overrides: Any) -> TestClient:
        settings = Settings(data_dir=tmp_path / f"data{len(clients)}", **overrides)
        client = TestClient(create_app(settings), raise_server_exceptions=raise_server_exceptions)
        client.__enter__()
        clients.append(client)
        return client

    yield make
    for c in clients:
        c.__exit__(None, None, None)


def _directives(csp: str) -> dict[str, list[str]]:
    out = {}
    for part in csp.split(";"):
        words = part.split()
        if words:
            out[words[0]] = words[1:]
    return out


def _assert_security_headers(headers: Any) -> None:
    csp = _directives(headers["content-security-policy"])
    assert csp["script-src"] == ["'self'"]  # no 'unsafe-inline', no 'unsafe-eval'
    assert csp["default-src"] == ["'self'"]
    assert csp["frame-ancestors"] == ["'none'"]
    assert csp["base-uri"] == ["'self'"] and csp["form-action"] == ["'self'"]
    assert "data:" in csp["img-src"]
    assert headers["x-content-type-options"] == "nosniff"
    assert headers["x-frame-options"] == "DENY"
    assert headers["referrer-policy"] in ("no-referrer", "same-origin")
    assert "camera=()" in headers["permissions-policy"]


class TestSecurityHeaders:
    def test_basic(self, make_client: ClientFactory) -> None:
        c = make_client()
        for r in (
            c.get("/healthz"),
            c.post("/api/v1/fold", json=FOLD),
            c.get("/"),
            c.get("/predict"),
            c.get("/openapi.json"),
            c.get("/metrics"),
        ):
            assert r.status_code == 200, r.request.url
            _assert_security_headers(r.headers)

    def test_a_route_header_wins_and_none_is_doubled(self, make_client: ClientFactory) -> None:
        c = make_client()

        async def framed() -> PlainTextResponse:
            return PlainTextResponse(
                "x", headers={"X-Frame-Options": "SAMEORIGIN", "X-Request-ID": "from-route"}
            )

        c.app.add_api_route("/framed", framed)  # type: ignore[attr-defined]
        r = c.get("/framed", headers={"X-Request-ID": "cell-7"})
        raw = [k.lower() for k, _ in r.headers.multi_items()]
        assert r.headers["x-frame-options"] == "SAMEORIGIN"
        assert raw.count("x-frame-options") == 1
        # The request id is the service's to set: the client's, once.
        assert r.headers.get_list("x-request-id") == ["cell-7"]
        assert raw.count("content-security-policy") == 1

    def test_errors(self, make_client: ClientFactory) -> None:
        c = make_client()
        for r in (
            c.get("/no/such/page"),
            c.post("/api/v1/fold", json={"sample_rate_hz": -1}),
            c.post("/api/v1/fold", content=b"{", headers={"content-type": "application/json"}),
            c.get("/api/v1/diagnoses/" + "A" * 32),
            c.get("/d/" + "A" * 32),
        ):
            assert r.status_code >= 400
            _assert_security_headers(r.headers)

    def test_unhandled_error_has_no_trace(self, make_client: ClientFactory) -> None:
        c = make_client(raise_server_exceptions=False)

        async def boom() -> None:
            raise RuntimeError("secret-internal-detail")

        c.app.add_api_route("/boom", boom)  # type: ignore[attr-defined]
        r = c.get("/boom")
        assert r.status_code == 500
        assert r.headers["content-type"] == PROBLEM
        assert "secret-internal-detail" not in r.text
        assert "Traceback" not in r.text and "RuntimeError" not in r.text
        _assert_security_headers(r.headers)
        assert r.headers["x-request-id"]


class TestApiDocs:
    def test_basic(self, make_client: ClientFactory) -> None:
        c = make_client()
        r = c.get("/docs")
        assert r.status_code == 200
        _assert_security_headers(r.headers)
        scripts = re.findall(r"<script([^>]*)>(.*?)</script>", r.text, flags=re.S)
        assert scripts, "the page loads Swagger UI"
        for attrs, body in scripts:
            assert body.strip() == "", "no inline script (the CSP would block it)"
            src = re.search(r'src="([^"]+)"', attrs)
            assert src and src.group(1).startswith("/"), "scripts come from this origin"
            js = c.get(src.group(1))
            assert js.status_code == 200 and "javascript" in js.headers["content-type"]
        for href in re.findall(r'<link[^>]*href="([^"]+)"', r.text):
            assert href.startswith("/")
            assert c.get(href).status_code == 200
        assert "http://" not in r.text and "https://" not in r.text

    def test_edges(self, make_client: ClientFactory) -> None:
        c = make_client()
        # ReDoc needs a blob: worker and a remote logo, which the CSP refuses: not served.
        assert c.get("/redoc").status_code == 404
        assert c.get("/openapi.json").json()["paths"]


class TestApiKeys:
    KEYS = "k-one-0123456789abcdef,k-two-fedcba9876543210"

    def test_off_by_default(self, make_client: ClientFactory) -> None:
        c = make_client()
        r = c.post("/api/v1/diagnoses", json=SAVE)
        assert r.status_code == 201
        saved = r.json()
        r = c.delete(saved["api_url"], headers={"X-Delete-Token": saved["delete_token"]})
        assert r.status_code == 204

    def test_basic(self, make_client: ClientFactory) -> None:
        c = make_client(api_keys=self.KEYS)
        r = c.post("/api/v1/diagnoses", json=SAVE)
        assert r.status_code == 401 and r.headers["content-type"] == PROBLEM
        assert "X-API-Key" in r.headers["www-authenticate"]
        assert r.json()["errors"][0]["field"] == "X-API-Key"
        r = c.post("/api/v1/diagnoses", json=SAVE, headers={"X-API-Key": "k-one-wrong"})
        assert r.status_code == 401 and "not valid" in r.json()["detail"]
        assert "k-one" not in r.text.replace("k-one-wrong", "")  # the keys are never echoed
        for key in self.KEYS.split(","):
            r = c.post("/api/v1/diagnoses", json=SAVE, headers={"X-API-Key": key})
            assert r.status_code == 201, r.text
        saved = r.json()
        # Reads and computations that do not save stay open.
        assert c.get(saved["api_url"]).status_code == 200
        assert c.get(saved["url"]).status_code == 200
        assert c.post("/api/v1/fold", json=FOLD).status_code == 200
        assert c.get("/healthz").status_code == 200
        # Deleting needs the key as well as the token.
        token = {"X-Delete-Token": saved["delete_token"]}
        assert c.delete(saved["api_url"], headers=token).status_code == 401
        r = c.delete(saved["api_url"], headers={**token, "X-API-Key": "k-two-fedcba9876543210"})
        assert r.status_code == 204

    def test_save_query(self, make_client: ClientFactory) -> None:
        c = make_client(api_keys=self.KEYS)
        body = {
            "sample_rate_hz": 1000,
            "spectrum": {
                "freq_hz": [i * 1.0 for i in range(501)],
                "amplitude": [1.0 if i == 300 else 1e-4 for i in range(501)],
            },
        }
        assert c.post("/api/v1/diagnose", json=body).status_code == 200
        assert c.post("/api/v1/diagnose?save=false", json=body).status_code == 200
        r = c.post("/api/v1/diagnose?save=true", json=body)
        assert r.status_code == 401
        r = c.post(
            "/api/v1/diagnose?save=1", json=body, headers={"X-API-Key": "k-one-0123456789abcdef"}
        )
        assert r.status_code == 200 and r.json()["saved"]["id"]
        assert c.post("/api/v1/compare-rates?save=yes", json={}).status_code == 401

    def test_needs_api_key(self) -> None:
        assert needs_api_key("POST", "/api/v1/diagnoses")
        assert needs_api_key("DELETE", "/api/v1/diagnoses/abc")
        assert not needs_api_key("GET", "/api/v1/diagnoses/abc")
        assert not needs_api_key("POST", "/api/v1/fold")
        assert not needs_api_key("POST", "/api/v1/plan")
        assert not needs_api_key("POST", "/api/v1/diagnose")
        assert not needs_api_key("POST", "/api/v1/diagnose", "save=false&title=x")
        assert needs_api_key("POST", "/api/v1/diagnose", "title=x&save=True")
        assert needs_api_key("POST", "/api/v1/compare-rates", "save=on")
        # A value the route would refuse still counts as asking to save.
        assert needs_api_key("POST", "/api/v1/diagnose", "save=maybe")

    def test_constant_time(
        self, make_client: ClientFactory, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        calls: list[tuple[bytes, bytes]] = []
        real = hmac.compare_digest

        def spy(a: Any, b: Any) -> bool:
            calls.append((a, b))
            return real(a, b)

        monkeypatch.setattr(hmac, "compare_digest", spy)
        keys = frozenset({"alpha-key", "beta-key", "gamma-key"})
        assert key_matches("beta-key", keys)
        # Every configured key is compared, even after a match: no early exit.
        assert len(calls) == 3 and {b for _, b in calls} == {k.encode() for k in keys}
        calls.clear()
        assert not key_matches("delta-key", keys) and len(calls) == 3
        calls.clear()
        assert not key_matches("", keys) and not key_matches(None, keys)
        # Through the app.
        c = make_client(api_keys=self.KEYS)
        c.post("/api/v1/diagnoses", json=SAVE, headers={"X-API-Key": "guess"})
        assert len(calls) == 2


class TestCors:
    def test_closed_by_default(self, make_client: ClientFactory) -> None:
        c = make_client()
        r = c.post("/api/v1/fold", json=FOLD, headers={"Origin": "https://elsewhere.example"})
        assert r.status_code == 200
        assert "access-control-allow-origin" not in r.headers
        r = c.options(
            "/api/v1/fold",
            headers={
                "Origin": "https://elsewhere.example",
                "Access-Control-Request-Method": "POST",
            },
        )
        assert "access-control-allow-origin" not in r.headers

    def test_configured_origin(self, make_client: ClientFactory) -> None:
        origin = "https://cell-controller.example"
        c = make_client(cors_origins=f"{origin}, https://other.example")
        r = c.post("/api/v1/fold", json=FOLD, headers={"Origin": origin})
        assert r.headers["access-control-allow-origin"] == origin
        r = c.options(
            "/api/v1/diagnoses",
            headers={
                "Origin": origin,
                "Access-Control-Request-Method": "POST",
                "Access-Control-Request-Headers": "content-type, x-api-key",
            },
        )
        assert r.status_code == 200
        assert r.headers["access-control-allow-origin"] == origin
        assert "x-api-key" in r.headers["access-control-allow-headers"].lower()
        r = c.post("/api/v1/fold", json=FOLD, headers={"Origin": "https://evil.example"})
        assert "access-control-allow-origin" not in r.headers


class TestRateLimit:
    def test_basic(self, make_client: ClientFactory) -> None:
        c = make_client(rate_limit_per_minute=3)
        for _ in range(3):
            assert c.post("/api/v1/fold", json=FOLD).status_code == 200
        r = c.post("/api/v1/fold", json=FOLD)
        assert r.status_code == 429 and r.headers["content-type"] == PROBLEM
        # One token comes back every 60/3 = 20 s.
        assert 1 <= int(r.headers["retry-after"]) <= 20
        assert "3 requests per minute" in r.json()["detail"]
        _assert_security_headers(r.headers)
        # Pages and health checks are not limited; another key is another client.
        assert c.get("/healthz").status_code == 200
        assert c.get("/").status_code == 200
        r = c.post("/api/v1/fold", json=FOLD, headers={"X-API-Key": "someone"})
        assert r.status_code == 200

    def test_off_by_default(self, make_client: ClientFactory) -> None:
        c = make_client()
        assert all(c.get("/api/v1/diagnoses/x").status_code == 404 for _ in range(30))

    def test_refill(self) -> None:
        now = [1000.0]
        limit = RateLimit(app=None, per_minute=6, clock=lambda: now[0])  # type: ignore[arg-type]
        assert [limit.take("a") for _ in range(6)] == [0.0] * 6
        wait = limit.take("a")
        assert wait == pytest.approx(10.0)  # 60 s / 6 per token
        assert limit.take("b") == 0.0  # buckets are per client
        now[0] += 10.0
        assert limit.take("a") == 0.0
        assert limit.take("a") > 0
        now[0] += 3600.0  # a long pause refills to the burst size, not beyond
        assert [limit.take("a") for _ in range(6)] == [0.0] * 6
        assert limit.take("a") > 0


class TestBodyLimit:
    def test_json(self, make_client: ClientFactory) -> None:
        c = make_client(max_body_bytes=2048)
        big = {**FOLD, "title": "x" * 5000}
        for path in ("/api/v1/fold", "/api/v1/diagnoses", "/api/v1/diagnose", "/predict"):
            r = c.post(path, json=big)
            assert r.status_code == 413, path
            assert r.headers["content-type"] == PROBLEM
            body = r.json()
            assert "2048" in body["detail"] and "max_body_bytes" in body["detail"]
            assert body["errors"][0]["limit"] == 2048

    def test_chunked(self, make_client: ClientFactory) -> None:
        c = make_client(max_body_bytes=2048)

        def chunks() -> Iterator[bytes]:
            yield b'{"sample_rate_hz": 1000, "tones": ['
            for _ in range(200):
                yield b'{"label": "a", "freq_hz": 700},'
            yield b'{"label": "a", "freq_hz": 700}]}'

        r = c.post("/api/v1/fold", content=chunks(), headers={"content-type": "application/json"})
        assert "content-length" not in r.request.headers
        assert r.status_code == 413 and "2048" in r.json()["detail"]
        # Under the limit the streamed body goes through.
        r = c.post(
            "/api/v1/fold",
            content=iter([json.dumps(FOLD).encode()]),
            headers={"content-type": "application/json"},
        )
        assert r.status_code == 200

    def test_multipart(self, make_client: ClientFactory) -> None:
        c = make_client(max_upload_bytes=4096, max_body_bytes=100_000)
        files = {"file": ("spectrum.csv", b"0,1\n" * 3000, "text/csv")}
        r = c.post("/api/v1/diagnose", files=files, data={"request": "{}"})
        assert r.status_code == 413 and r.headers["content-type"] == PROBLEM
        body = r.json()
        assert "4096" in body["detail"] and "max_upload_bytes" in body["detail"]
        # A small upload passes the limit and reaches the route.
        lines = "".join(f"{i},{1.0 if i == 300 else 1e-4}\n" for i in range(0, 500, 5))
        r = c.post(
            "/api/v1/diagnose",
            files={"file": ("s.csv", lines.encode(), "text/csv")},
            data={"request": json.dumps({"sample_rate_hz": 1000})},
        )
        assert r.status_code != 413


class TestUploads:
    def test_spooled_in_data_dir(
        self, make_client: ClientFactory, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        before = tempfile.tempdir
        opened: list[str] = []
        real = tempfile.TemporaryFile

        def spy(*args: Any, **kwargs: Any) -> Any:
            f = real(*args, **kwargs)
            opened.append(os.readlink(f"/proc/self/fd/{f.fileno()}"))
            return f

        monkeypatch.setattr(tempfile, "TemporaryFile", spy)
        c = make_client(max_upload_bytes=8_000_000)
        spool = (tmp_path / "data0" / "tmp").resolve()
        evil = "evil-upload-name.csv"
        # Over Starlette's 1 MiB in-memory limit, so the upload goes to disk.
        payload = b"".join(f"{i},{1e-4}\n".encode() for i in range(150_000))
        assert len(payload) > 1024 * 1024
        r = c.post(
            "/api/v1/diagnose",
            files={"file": (f"../../{evil}", payload, "text/csv")},
            data={"request": json.dumps({"sample_rate_hz": 1_000_000})},
        )
        assert r.status_code < 500
        assert opened, "the upload was spooled to a file"
        for link in opened:
            assert link.startswith(str(spool) + "/"), link
            assert evil not in link
            assert link.endswith("(deleted)") or "#" in link, "unnamed or already unlinked"
        assert list(spool.iterdir()) == []
        found = [p for p in tmp_path.rglob("*") if evil in p.name]
        found += [p for p in Path.cwd().rglob(evil)]
        assert found == []
        c.__exit__(None, None, None)
        assert tempfile.tempdir == before  # put back when the app stops


class TestSavedResults:
    def test_ids_and_no_listing(self, make_client: ClientFactory) -> None:
        c = make_client()
        ids = [c.post("/api/v1/diagnoses", json=SAVE).json()["id"] for _ in range(5)]
        assert len(set(ids)) == 5
        for rid in ids:
            # URL-safe base64 carries 6 bits per character: ≥ 128 bits needs ≥ 22.
            assert re.fullmatch(r"[A-Za-z0-9_-]+", rid) and len(rid) * 6 >= 128
        assert c.get("/api/v1/diagnoses").status_code in (404, 405)
        assert c.get("/api/v1/diagnoses/").status_code in (404, 405)
        assert c.get("/d/").status_code in (404, 405)

    def test_delete_token_constant_time(
        self, make_client: ClientFactory, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        c = make_client()
        saved = c.post("/api/v1/diagnoses", json=SAVE).json()
        calls: list[tuple[Any, Any]] = []
        real = hmac.compare_digest

        def spy(a: Any, b: Any) -> bool:
            calls.append((a, b))
            return real(a, b)

        monkeypatch.setattr(hmac, "compare_digest", spy)
        r = c.delete(saved["api_url"], headers={"X-Delete-Token": "not-the-token"})
        assert r.status_code == 403
        assert len(calls) == 1
        # The comparison is between hashes, never the token itself.
        assert saved["delete_token"].encode() not in calls[0]
        r = c.delete(saved["api_url"], headers={"X-Delete-Token": saved["delete_token"]})
        assert r.status_code == 204 and len(calls) == 2


def test_module_surface() -> None:
    assert "'unsafe-inline'" not in _directives(security.CSP)["script-src"]
