"""Benchmark: navigation to a fully drawn 'Reactor trends' page, one year of 1-minute results
against the same page with a one-week window, in a real browser (Debian chromium, Playwright).

The store (one year of invented 1-minute results of unit R-210, ~10 million values, written
through the store's own write API) is built once into benchmarks/results/ and reused.
"Fully drawn": the page's four metrics are shown, its four Altair charts have drawn their
lines and the script run is over. Timed: navigation from the sidebar (the app already open,
query cache warm; median of repeats), and the first full page load on a fresh server (empty
cache: Streamlit's own start-up in the browser plus the store read). Printed, never asserted.

Run: ``.venv/bin/python benchmarks/bench_dashboard.py`` (or ``make bench``).
"""

from __future__ import annotations

import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
for p in (ROOT, ROOT / "src", ROOT / "dashboards"):
    sys.path.insert(0, str(p))

import pandas as pd  # noqa: E402

from kinedash import serve  # noqa: E402
from kinedash.source import chart_series, connect  # noqa: E402
from tests.dashboard.fill import fill_store  # noqa: E402

STORE = ROOT / "benchmarks" / "results" / "dashboard_year_1min.sqlite"
START, END = pd.Timestamp("2025-12-01T00:00Z"), pd.Timestamp("2026-12-01T00:00Z")
CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
        "--disable-component-update", "--disable-sync", "--no-first-run"]
REPEATS = 3
DRAWN = """() => {
  const m = document.querySelectorAll('[data-testid=stMetricValue]').length >= 4;
  const charts = [...document.querySelectorAll('[data-testid=stVegaLiteChart]')];
  const lines = charts.filter(c => [...c.querySelectorAll('.mark-line path')].some(p => (p.getAttribute('d') || '').length > 100));
  const running = document.querySelector('[data-testid=stStatusWidget]');
  return m && lines.length >= 4 && !running;
}"""


def build_store() -> str:
    url = f"sqlite:///{STORE}"
    if STORE.exists():
        try:
            if connect(url).watermark("R-210") is not None:
                return url
        except Exception:  # noqa: BLE001 - a half-written file from an interrupted build is rebuilt
            pass
        STORE.unlink()
    STORE.parent.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    print(f"building one year of 1-minute results into {STORE} (once) ...", flush=True)
    fill_store(url, START, END, "1min", units=("R-210",), reconciliation=False).close()
    print(f"  built in {time.perf_counter() - t0:.0f} s", flush=True)
    return url


GLANCE_SHOWN = """() => { const h = document.querySelector('h1');
  return h && h.innerText.includes('Morning verdict') && !document.querySelector('[data-stale=true]'); }"""


def check_caption(page, bucketed: bool) -> None:
    caption = page.locator("[data-testid=stCaptionContainer]", has_text="charts show").first.inner_text()
    assert ("buckets" in caption) == bucketed, caption


def browser(p, profile):
    ctx = p.chromium.launch_persistent_context(profile, executable_path=CHROMIUM, headless=True, args=ARGS,
                                               viewport={"width": 1400, "height": 1000})
    ctx.set_default_timeout(120_000)
    return ctx, ctx.new_page()


def first_load(p, url: str, code: str) -> float:
    """Full page load of /trends?range=<code> on a fresh server (empty query cache). [s]"""
    proc, base = serve.start({"KINETRACE_STORE_URL": url})
    try:
        with tempfile.TemporaryDirectory() as profile:
            ctx, page = browser(p, profile)
            page.goto(f"{base}/_stcore/health")                # browser up, nothing of the app loaded
            t0 = time.perf_counter()
            page.goto(f"{base}/trends?range={code}")
            page.wait_for_function(DRAWN, polling=20)
            dt = time.perf_counter() - t0
            check_caption(page, code == "365d")
            ctx.close()
    finally:
        serve.stop(proc)
    return dt


def in_app(p, url: str, code: str) -> list[float]:
    """Sidebar navigation Morning verdict -> Reactor trends, range kept in the session. [s]"""
    proc, base = serve.start({"KINETRACE_STORE_URL": url})
    times = []
    try:
        with tempfile.TemporaryDirectory() as profile:
            ctx, page = browser(p, profile)
            page.goto(f"{base}/trends?range={code}")
            page.wait_for_function(DRAWN, polling=20)
            check_caption(page, code == "365d")
            for _ in range(REPEATS):
                page.locator("[data-testid=stSidebarNavLink]", has_text="Morning verdict").click()
                page.wait_for_function(GLANCE_SHOWN, polling=20)
                t0 = time.perf_counter()
                page.locator("[data-testid=stSidebarNavLink]", has_text="Reactor trends").click()
                page.wait_for_function(DRAWN, polling=20)
                times.append(time.perf_counter() - t0)
            ctx.close()
    finally:
        serve.stop(proc)
    return times


def main() -> None:
    url = build_store()
    store = connect(url)
    read = {}
    for code, start in (("7d", END - pd.Timedelta(days=7)), ("365d", START)):
        t0 = time.perf_counter()
        chart_series(store, "R-210", ["conversion", "k_ref:addition", "k_ref_low:addition", "k_ref_high:addition",
                                      "activity", "activity_fit", "activity_band_low", "activity_band_high",
                                      "production_mass", "target_mass", "steady"], start, END)
        read[code] = time.perf_counter() - t0
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        cold = {c: first_load(p, url, c) for c in ("7d", "365d")}
        nav = {c: statistics.median(in_app(p, url, c)) for c in ("7d", "365d")}

    def line(what, d):
        return (f"  {what}: one week {d['7d']:.2f} s, one year {d['365d']:.2f} s, "
                f"ratio year/week {d['365d'] / d['7d']:.2f}")

    print("'Reactor trends' of R-210 fully drawn (4 metrics, 4 charts), one year of 1-minute results "
          "(525,600 rows per series) against a one-week window; goal: one year under 2 s")
    print(line(f"navigation from the sidebar (median of {REPEATS}, query cache warm)", nav))
    print(line("first full page load on a fresh server (empty query cache)", cold))
    print(line("server-side store read of the page's 11 series, no browser", read))


if __name__ == "__main__":
    main()
