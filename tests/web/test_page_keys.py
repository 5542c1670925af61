"""Saving from the pages needs the API key when the install has keys configured."""

from __future__ import annotations

import html as html_lib
import re
from collections.abc import Iterator
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from service.app import create_app
from service.config import Settings


@pytest.fixture
def keyed(tmp_path: Path) -> Iterator[TestClient]:
    with TestClient(create_app(Settings(data_dir=tmp_path / "d", api_keys="k-one,k-two"))) as c:
        yield c


def _fold_request(client: TestClient) -> str:
    m = re.search(r'name="request" value="([^"]+)"', client.get("/predict?demo=1").text)
    assert m
    return html_lib.unescape(m.group(1))


def test_share_needs_the_key(keyed: TestClient) -> None:
    page = keyed.get("/predict?demo=1").text
    assert 'name="api_key"' in page and 'type="password"' in page
    req = _fold_request(keyed)
    r = keyed.post("/share", data={"kind": "fold", "request": req})
    assert r.status_code == 401 and "API key" in r.text
    r = keyed.post("/share", data={"kind": "fold", "request": req, "api_key": "wrong"})
    assert r.status_code == 401
    r = keyed.post("/share", data={"kind": "fold", "request": req, "api_key": "k-two"})
    assert r.status_code == 200 and "/d/" in r.text


def test_no_key_field_when_open(client: TestClient) -> None:
    page = client.get("/predict?demo=1").text
    assert 'name="api_key"' not in page
    r = client.post("/share", data={"kind": "fold", "request": _fold_request(client)})
    assert r.status_code == 200


def test_plan_share_needs_the_key(keyed: TestClient) -> None:
    page = keyed.get("/plan?demo=1").text
    m = re.search(r'action="/plan/share".*?name="request" value="([^"]+)"', page, re.S)
    assert m and 'name="api_key"' in page
    req = html_lib.unescape(m.group(1))
    assert keyed.post("/plan/share", data={"request": req}).status_code == 401
    r = keyed.post("/plan/share", data={"request": req, "api_key": "k-one"})
    assert r.status_code == 200 and "/d/" in r.text


def test_forms_that_save_ask_for_the_key(keyed: TestClient) -> None:
    for path in ("/diagnose", "/compare"):
        page = keyed.get(path).text
        assert 'name="share"' in page and 'name="api_key"' in page, path
