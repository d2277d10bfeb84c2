"""Chromium driven by Selenium, for the tests of the web page.

The browser and its driver are Debian's ``chromium`` and ``chromium-driver`` packages
(``make test`` installs them when it runs as root on Debian). Chromium runs headless, with
a new empty profile, and with everything that would reach the network on its own turned
off. :func:`full_page_screenshot` writes the PNGs that the README shows.
"""

from __future__ import annotations

import os
import shutil
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

CHROMIUM = ("chromium", "chromium-browser", "google-chrome")
DRIVER = "chromedriver"
FLAGS = (
    "--headless=new", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
    "--disable-dev-shm-usage", "--hide-scrollbars", "--force-device-scale-factor=1",
)
HOW_TO_INSTALL = (
    "install Chromium and its driver (Debian: apt-get install -y chromium chromium-driver)"
)


def browser_paths() -> tuple[str, str] | None:
    """The Chromium binary and chromedriver on PATH, or None when either is missing."""
    browser = next((found for name in CHROMIUM if (found := shutil.which(name))), None)
    driver = shutil.which(DRIVER)
    return (browser, driver) if browser and driver else None


@contextmanager
def chromium(
    profile: Path, downloads: Path, width: int = 1280, height: int = 900
) -> Iterator[Any]:
    """A headless Chromium session with its own profile folder and download folder."""
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    paths = browser_paths()
    if paths is None:
        raise RuntimeError(HOW_TO_INSTALL)
    browser, driver_path = paths
    options = webdriver.ChromeOptions()
    options.binary_location = browser
    for flag in FLAGS:
        options.add_argument(flag)
    options.add_argument(f"--user-data-dir={profile}")
    options.add_argument(f"--window-size={width},{height}")
    options.add_experimental_option("prefs", {
        "download.default_directory": str(downloads),
        "download.prompt_for_download": False,
        "safebrowsing.enabled": False,
    })
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    # The driver's path is given, so Selenium's own driver manager, which would go to the
    # network, is never asked.
    os.environ.setdefault("SE_OFFLINE", "true")
    session = webdriver.Chrome(options=options, service=Service(executable_path=driver_path))
    try:
        yield session
    finally:
        session.quit()


def full_page_screenshot(session: Any, path: Path, width: int) -> None:
    """The whole page at ``width`` CSS pixels, however long it is, as a PNG."""
    height = session.execute_script("return document.documentElement.scrollHeight")
    session.set_window_size(width, max(int(height) + 120, 400))
    path.parent.mkdir(parents=True, exist_ok=True)
    session.save_screenshot(str(path))
