"""PostgreSQL unreachable: clear 503s, liveness unaffected, recovery without a restart.

The app reaches the shared PostgreSQL through a TCP forwarder the test takes down
(refused connections, open ones cut) and brings back.
"""

from __future__ import annotations

import time
from collections.abc import Iterator
from pathlib import Path

import httpx
import pytest

from ._proxy import TcpProxy
from ._server import check_saved, running, save_body

PROBLEM = "application/problem+json"

pytestmark = [pytest.mark.slow, pytest.mark.postgres]


@pytest.fixture
def proxy() -> Iterator[TcpProxy]:
    p = TcpProxy("127.0.0.1", 5432)
    try:
        yield p
    finally:
        p.shutdown()


def _assert_store_unavailable(r: httpx.Response) -> None:
    assert r.status_code == 503, r.text
    assert r.headers["content-type"] == PROBLEM
    assert r.headers["retry-after"] == "5"
    body = r.json()
    assert body["status"] == 503
    assert body["type"].endswith("store-unavailable")
    assert "database" in body["detail"]


def _save_when_back(client: httpx.Client, n: int, within_s: float = 20.0) -> dict[str, object]:
    deadline = time.monotonic() + within_s
    while True:
        r = client.post("/api/v1/diagnoses", json=save_body(n))
        if r.status_code == 201 or time.monotonic() > deadline:
            assert r.status_code == 201, r.text
            saved: dict[str, object] = r.json()
            return saved
        time.sleep(0.2)


class TestDatabaseAway:
    def test_basic(self, proxy: TcpProxy, pg_schema_url: str, tmp_path: Path) -> None:
        url = pg_schema_url.replace("127.0.0.1:5432", f"127.0.0.1:{proxy.port}")
        assert url != pg_schema_url
        env = {"FOLDWISE_DATABASE_URL": url, "FOLDWISE_DATA_DIR": str(tmp_path / "data")}
        # The database is away from the start: the app must come up anyway (liveness),
        # not be ready, and migrate once the database is back.
        with (
            running(env, workers=1, log_path=tmp_path / "server.log", ready_path="/healthz") as s,
            httpx.Client(base_url=s.base, timeout=30) as client,
        ):
            _assert_store_unavailable(client.get("/readyz"))
            _assert_store_unavailable(client.post("/api/v1/diagnoses", json=save_body(0)))

            proxy.start()
            first = _save_when_back(client, 1)
            assert client.get("/readyz").status_code == 200
            check_saved(client, 1, first)

            proxy.stop()  # cuts the pooled connections too
            _assert_store_unavailable(client.post("/api/v1/diagnoses", json=save_body(2)))
            _assert_store_unavailable(client.get(f"/api/v1/diagnoses/{first['id']}"))
            _assert_store_unavailable(client.get("/readyz"))
            assert client.get("/healthz").status_code == 200
            # Computations that need no database keep working.
            fold = client.post("/api/v1/fold", json=save_body(3)["request"])
            assert fold.status_code == 200, fold.text

            proxy.start()
            again = _save_when_back(client, 4)
            assert client.get("/readyz").status_code == 200
            check_saved(client, 1, first)
            check_saved(client, 4, again)
