"""Fixtures shared by every test area: a real headless Chromium for the browser tests.

The browser is Debian's chromium (``/usr/bin/chromium``), driven by Playwright; tools/test
installs it when missing. Playwright's own browser download is never used.
"""

from __future__ import annotations

import os
import shutil
from collections.abc import Iterator
from typing import Any

import pytest

CHROMIUM_ARGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
]


def chromium_path() -> str:
    path = os.environ.get("STATIONCHECK_CHROMIUM") or shutil.which("chromium") or ""
    if not path:
        pytest.fail("browser tests need Debian's chromium (/usr/bin/chromium); tools/test "
                    "installs it with apt-get when run as root")
    return path


@pytest.fixture(scope="session")
def browser() -> Iterator[Any]:
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        instance = pw.chromium.launch(executable_path=chromium_path(), args=CHROMIUM_ARGS)
        try:
            yield instance
        finally:
            instance.close()


@pytest.fixture
def page(browser: Any) -> Iterator[Any]:
    """A fresh page at 1280x800 (the smaller station monitor), closed after the test."""
    context = browser.new_context(viewport={"width": 1280, "height": 800})
    tab = context.new_page()
    tab.set_default_timeout(10_000)
    try:
        yield tab
    finally:
        context.close()
