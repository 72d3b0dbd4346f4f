"""Benchmark: the dashboard in headless Chromium (Debian's chromium and chromium-driver).

1. First render of the demo station (365 days): from the browser's request of the page
   to the first view's charts drawn.  Measured twice: with a fresh browser profile
   (nothing cached: the browser downloads and compiles plotly.js, ~4.8 MB) and on five
   reloads (the scripts cached, as for anyone who has opened the page before; Chromium
   keeps compiled code only from the second load on, so the first reload is slower).
2. A 90-day re-plan from the button: from the click to the charts of the view redrawn
   with the new plan (what-if applied, forecast fitted, futures sampled, plan solved, risk
   replayed, in the background process; the page polling for the result; the views
   redrawn).  Each re-plan moves the SO2 removal slider one step first, so each plans a
   new scenario.

Run:  python bench/dashboard.py [--futures N] [--replans K] [--shots DIR]

0. The start: the 365-day demo served with its first plan made in the background, from
   `create_app` to the first answer (the startup page), then until the plan is ready,
   then a second start with the same inputs, which reads the plan from the plan cache.

Targets: first answer <= 3 s; first render <= 2 s; 90-day re-plan <= 5 s end to end.
The app is served in a thread on 127.0.0.1; nothing else is contacted.  The startup plan
is timed and printed too, but it is not part of a target.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

FIRST_RENDER_TARGET_S = 2.0
#: From the start of the app to its first answer, while the startup plan is made [s].
FIRST_ANSWER_TARGET_S = 3.0
REPLAN_TARGET_S = 5.0


def serve(app):
    """The production server (waitress) in a thread: ``(stop, url)``."""
    from reagentplan.dashboard.testing import serve_in_thread

    url, stop = serve_in_thread(app)
    return stop, url


def browser(profile: str):
    from reagentplan.dashboard.testing import chromium_driver

    return chromium_driver(profile)


DRAWN = ("return document.querySelectorAll('.rp-view .js-plotly-plot').length >= 3 && "
         "document.querySelectorAll('.rp-view .js-plotly-plot svg.main-svg').length >= 6")


def first_answer(url: str) -> float:
    """Seconds to fetch the page's layout (the startup page while the plan is made)."""
    import urllib.request

    t = time.perf_counter()
    with urllib.request.urlopen(url + "_dash-layout", timeout=60) as r:
        r.read()
    return time.perf_counter() - t


def until_ready(app, t0: float, limit: float = 1800.0) -> float:
    """Seconds from ``t0`` until the app's startup plan is ready."""
    while not app.reagentplan.ready:
        if app.reagentplan.progress.snapshot()["error"]:
            raise SystemExit(f"the startup plan failed: {app.reagentplan.progress.snapshot()['error']}")
        if time.perf_counter() - t0 > limit:
            raise SystemExit("the startup plan was not ready in time")
        time.sleep(0.05)
    return time.perf_counter() - t0


def first_render(driver, url: str) -> float:
    """Seconds from navigation start to the first view's three charts drawn."""
    driver.get("about:blank")
    driver.get(url)
    while not driver.execute_script(DRAWN):
        time.sleep(0.01)
    return driver.execute_script("return performance.now()") / 1000.0


HOOK = """
window.__plots = [];
window.__labelAt = 0;
document.querySelectorAll('.js-plotly-plot').forEach(function (gd) {
    gd.on('plotly_afterplot', function () { window.__plots.push(performance.now()); });
});
var label = document.getElementById('plan-label');
window.__label = label.innerText;
new MutationObserver(function () {
    if (!window.__labelAt && label.innerText != window.__label) { window.__labelAt = performance.now(); }
}).observe(label, {childList: true, subtree: true, characterData: true});
window.__t0 = performance.now();
document.getElementById('replan-btn').click();
"""

DONE = """
var m = document.getElementById('replan-message');
return m.className.indexOf('good') >= 0 && m.innerText.indexOf('Re-planned') == 0 &&
       window.__labelAt > 0 &&
       window.__plots.filter(function (t) { return t >= window.__labelAt - 1000; }).length >= 3 &&
       document.getElementById('replan-box').className.indexOf('busy') < 0;
"""


def replan_once(driver, timeout: float = 300.0) -> tuple[float, str]:
    """Seconds from the click to the last chart redrawn with the new plan (the plan's
    label changing marks the new plan's arrival; the charts' own 'afterplot' events
    mark their redraw)."""
    from selenium.webdriver.common.by import By

    from selenium.webdriver.common.keys import Keys

    # a what-if each time (SO2 removal 0.1 % lower), so every re-plan plans a new scenario
    # rather than one whose forecast fit is already remembered
    thumb = driver.find_element(By.CSS_SELECTOR, "#removal [role=slider]")
    before = thumb.get_attribute("aria-valuenow")
    thumb.send_keys(Keys.ARROW_LEFT)
    while thumb.get_attribute("aria-valuenow") == before:
        time.sleep(0.02)
    time.sleep(0.2)
    driver.execute_script(HOOK)
    t_end = time.time() + timeout
    while time.time() < t_end:
        if driver.execute_script(DONE):
            time.sleep(0.5)  # later redraws of the same update still count
            ms = driver.execute_script(
                "return Math.max(window.__labelAt, Math.max.apply(null, window.__plots)) - window.__t0")
            return ms / 1000.0, driver.find_element(By.ID, "replan-message").text
        time.sleep(0.02)
    raise TimeoutError("the re-plan did not finish")


def shots(driver, url: str, folder: Path) -> None:
    from selenium.webdriver.common.by import By

    folder.mkdir(parents=True, exist_ok=True)
    driver.get(url)
    while not driver.execute_script(DRAWN):
        time.sleep(0.05)
    for tab in ("coordinator", "plant", "sales"):
        driver.find_element(By.ID, f"tab-{tab}").click()
        time.sleep(1.5)
        height = driver.execute_script("return document.documentElement.scrollHeight")
        driver.set_window_size(1500, min(max(1100, height + 40), 4000))
        time.sleep(1.0)
        driver.save_screenshot(str(folder / f"demo365_{tab}.png"))
        driver.set_window_size(1500, 1100)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--futures", type=int, default=500, help="futures per plan (default %(default)s)")
    parser.add_argument("--replans", type=int, default=3, help="re-plans to time (default %(default)s)")
    parser.add_argument("--shots", type=Path, default=None, help="save screenshots of the 365-day views here")
    args = parser.parse_args(argv)
    from reagentplan.dashboard.testing import CHROMEDRIVER, CHROMIUM

    if not (os.path.exists(CHROMIUM) and os.path.exists(CHROMEDRIVER)):
        print(f"needs {CHROMIUM} and {CHROMEDRIVER} (Debian chromium, chromium-driver)")
        return 2

    from reagentplan.dashboard.app import create_app
    from reagentplan.demo.build_demo import build_demo_workbook

    work = Path(tempfile.mkdtemp(prefix="reagentplan-bench-"))
    try:
        return _run(args, work, create_app, build_demo_workbook)
    finally:
        shutil.rmtree(work, ignore_errors=True)


def _run(args, work: Path, create_app, build_demo_workbook) -> int:
    print(f"futures per plan: {args.futures}; machine: {os.cpu_count()} cores")

    demo365 = build_demo_workbook(work / "demo365.xlsx", horizon_days=365)
    t = time.perf_counter()
    app365 = create_app(demo365, futures=args.futures, work_dir=work / "app365", background=True,
                        plan_cache=work / "plan-cache")
    srv365, url365 = serve(app365)
    answered = first_answer(url365) + (time.perf_counter() - t)
    print(f"start to the first answer, 365-day demo, plan still being made: {answered:.2f} s "
          f"(target <= {FIRST_ANSWER_TARGET_S:g} s: "
          f"{'met' if answered <= FIRST_ANSWER_TARGET_S else 'missed'})")
    print(f"startup plan, 365-day demo (in the background; not a target): {until_ready(app365, t):.1f} s")
    t = time.perf_counter()
    again = create_app(demo365, futures=args.futures, work_dir=work / "again", background=True,
                       plan_cache=work / "plan-cache")
    print(f"second start with the same inputs, plan read from the cache: {until_ready(again, t):.1f} s "
          f"(from the cache: {again.reagentplan.from_cache})")

    cold_profile = tempfile.mkdtemp(dir=work)
    driver = browser(cold_profile)
    try:
        cold = first_render(driver, url365)
        warm = [first_render(driver, url365) for _ in range(5)]
        if args.shots:
            shots(driver, url365, args.shots)
    finally:
        driver.quit()
        srv365()
    warm_s = statistics.median(warm)
    print(f"first render, 365-day demo, fresh browser profile: {cold:.2f} s "
          f"(target <= {FIRST_RENDER_TARGET_S:g} s: {'met' if cold <= FIRST_RENDER_TARGET_S else 'missed'})")
    print(f"first render, 365-day demo, reloaded (median of {len(warm)}: "
          f"{', '.join(f'{w:.2f}' for w in warm)}): {warm_s:.2f} s "
          f"(target <= {FIRST_RENDER_TARGET_S:g} s: {'met' if warm_s <= FIRST_RENDER_TARGET_S else 'missed'})")

    t = time.perf_counter()
    app90 = create_app(build_demo_workbook(work / "demo90.xlsx", horizon_days=90),
                       futures=args.futures, work_dir=work / "app90")
    print(f"startup plan, 90-day demo (before serving; not a target): {time.perf_counter() - t:.1f} s")
    srv90, url90 = serve(app90)
    driver = browser(tempfile.mkdtemp(dir=work))
    try:
        first_render(driver, url90)
        times = []
        for k in range(args.replans):
            seconds, message = replan_once(driver)
            times.append(seconds)
            print(f"  re-plan {k + 1}: {seconds:.2f} s from the click to the charts redrawn "
                  f"(server: {message})")
    finally:
        driver.quit()
        srv90()
    med = statistics.median(times)
    print(f"90-day re-plan from the button, end to end (median of {len(times)}): {med:.2f} s "
          f"(target <= {REPLAN_TARGET_S:g} s: {'met' if med <= REPLAN_TARGET_S else 'missed'})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
