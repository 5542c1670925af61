"""A real server process on 127.0.0.1 and Debian's headless Chromium driven by Playwright."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
import urllib.request
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--no-first-run",
    "--disable-sync",
]
ROOT = Path(__file__).resolve().parents[2]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@pytest.fixture(scope="session")
def server_url(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    port = _free_port()
    env = {**os.environ, "FOLDWISE_DATA_DIR": str(tmp_path_factory.mktemp("data"))}
    # The app factory that adds the pages (idempotent if the app already has them).
    cmd = [
        sys.executable,
        "-m",
        "uvicorn",
        "service.app:create_app",
        "--factory",
        "--host",
        "127.0.0.1",
        "--port",
        str(port),
        "--log-level",
        "warning",
    ]
    proc = subprocess.Popen(cmd, cwd=ROOT, env=env)
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 90  # a cold start on a busy 2-core machine is slow
        while True:
            try:
                with urllib.request.urlopen(url + "/", timeout=1):
                    break
            except OSError:
                if proc.poll() is not None or time.monotonic() > deadline:
                    raise RuntimeError("the server did not start") from None
                time.sleep(0.2)
        yield url
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()


@pytest.fixture(scope="session")
def browser() -> Iterator[object]:
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        b = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS, headless=True)
        try:
            yield b
        finally:
            b.close()


@pytest.fixture
def page(browser: Any) -> Iterator[Any]:
    """A fresh page in its own context that records console errors and page errors."""
    context = browser.new_context(viewport={"width": 1280, "height": 1000})
    p = context.new_page()
    p.console_errors = []
    p.on("console", lambda m: m.type == "error" and p.console_errors.append(m.text))
    p.on("pageerror", lambda e: p.console_errors.append(str(e)))
    try:
        yield p
    finally:
        context.close()
