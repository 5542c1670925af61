"""The real application with the pages installed, and small HTML helpers for the tests."""

from __future__ import annotations

import itertools
import json
from collections.abc import Iterator
from html.parser import HTMLParser
from typing import Any

import pytest
from fastapi.testclient import TestClient

from service.app import create_app
from service.config import Settings
from service.web.forms import FormState


@pytest.fixture
def page_client(settings: Settings) -> Iterator[TestClient]:
    app = create_app(settings)  # the factory installs the pages
    with TestClient(app, raise_server_exceptions=True) as c:
        yield c


class PageParser(HTMLParser):
    """Collects what the tests look at: tags with attributes, labels, headings, scripts."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.label_for: set[str] = set()
        self.headings: list[int] = []
        self.json_blocks: dict[str, str] = {}
        self._json_id: str | None = None
        self._buf: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        self.tags.append((tag, a))
        if tag == "label" and a.get("for"):
            self.label_for.add(str(a["for"]))
        if len(tag) == 2 and tag[0] == "h" and tag[1].isdigit():
            self.headings.append(int(tag[1]))
        if tag == "script" and a.get("type") == "application/json":
            self._json_id = a.get("id")
            self._buf = []

    def handle_data(self, data: str) -> None:
        if self._json_id is not None:
            self._buf.append(data)

    def handle_endtag(self, tag: str) -> None:
        if tag == "script" and self._json_id is not None:
            self.json_blocks[self._json_id] = "".join(self._buf)
            self._json_id = None


def parse_page(html: str) -> PageParser:
    p = PageParser()
    p.feed(html)
    p.close()
    return p


def figures_of(html: str) -> dict[str, Any]:
    return {k: json.loads(v) for k, v in parse_page(html).json_blocks.items()}


def form_data(state: FormState) -> dict[str, str]:
    """The fields a browser would post for a filled form."""
    data = {k: v for k, v in state.values.items() if v}
    for kind, rows in state.rows.items():
        for i, row in enumerate(rows):
            for name, value in row.items():
                data[f"{kind}-{i}-{name}"] = value
    return data


def controls_without_label(html: str) -> list[str]:
    page = parse_page(html)
    missing = []
    for tag, a in page.tags:
        if tag in ("input", "select", "textarea") and a.get("type") not in ("hidden", "submit"):
            cid = a.get("id")
            if not cid or cid not in page.label_for:
                missing.append(str(a.get("name") or cid))
    return missing


def assert_strict_page(html: str) -> None:
    """No inline script, no inline handlers, no style attributes; lang set; headings in order."""
    page = parse_page(html)
    for tag, a in page.tags:
        if tag == "script":
            assert a.get("src") or a.get("type") == "application/json", a
        assert not [k for k in a if k.startswith("on")], (tag, a)
        assert "style" not in a, (tag, a)
    assert ("html", {"lang": "en"}) in page.tags
    levels = page.headings
    assert levels[0] == 1 and levels.count(1) == 1
    assert all(b <= a + 1 for a, b in itertools.pairwise(levels)), levels
