"""Headless Chromium for checking the dashboard (the browser test and the benchmark).

Uses Debian's ``chromium`` and ``chromium-driver`` through Selenium (the ``test``
extra); Selenium is imported only when a driver is made.  The flags keep Chromium off
the network: no background fetches, no component updates, no sync.
"""

from __future__ import annotations

import os

CHROMIUM = "/usr/bin/chromium"
CHROMEDRIVER = "/usr/bin/chromedriver"
FLAGS = ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--no-first-run", "--disable-extensions", "--window-size=1500,1100")


def chromium_driver(profile: str | os.PathLike, downloads: str | os.PathLike | None = None):
    """A Selenium Chrome driver on Debian's Chromium with a fresh ``profile`` folder;
    files the page downloads go to ``downloads`` when given."""
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    os.environ.setdefault("SE_OFFLINE", "true")  # never let Selenium look for drivers online
    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for arg in FLAGS + (f"--user-data-dir={profile}",):
        opts.add_argument(arg)
    if downloads is not None:
        opts.add_experimental_option("prefs", {
            "download.default_directory": str(downloads), "download.prompt_for_download": False,
            "download.directory_upgrade": True, "safebrowsing.enabled": False})
    driver = webdriver.Chrome(service=Service(executable_path=CHROMEDRIVER), options=opts)
    if downloads is not None:
        driver.execute_cdp_cmd("Browser.setDownloadBehavior",
                               {"behavior": "allow", "downloadPath": str(downloads)})
    return driver


def serve_in_thread(app, host: str = "127.0.0.1", threads: int | None = None):
    """Serve ``app`` with the production server (`dashboard.app.make_server`, waitress)
    on a free port of ``host`` in a daemon thread; returns ``(url, stop)``."""
    import threading

    from .app import SERVER_THREADS, make_server, stop_server

    server = make_server(app, host, 0, threads=threads or SERVER_THREADS)
    thread = threading.Thread(target=server.run, daemon=True, name="reagentplan-server")
    thread.start()

    def stop() -> None:
        stop_server(server)
        thread.join(10)

    return f"http://{host}:{server.effective_port}/", stop
