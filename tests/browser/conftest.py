"""One Chromium per test module (Debian's /usr/bin/chromium driven by Playwright; no bundled browser)."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))
from labkit import CHROMIUM, CHROMIUM_ARGS  # noqa: E402


@pytest.fixture(scope="module")
def browser():
    if not CHROMIUM.exists():
        pytest.skip(f"{CHROMIUM} is missing (.ci/run installs Debian's chromium)")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
        try:
            yield b
        finally:
            b.close()
