"""Benchmark: every dashboard page fully drawn in a real browser (Debian chromium, Playwright) for a
one-year window of 1-minute results, the 'Reactor trends' page also against a one-week window, and
the chart thinning (tsdownsample) against the NumPy LTTB it replaced.

The store (one year of invented 1-minute results of unit R-210, ~10 million values, written
through the store's own write API) is built once into benchmarks/results/ and reused.
"Fully drawn", trends: the page's four metrics are shown, its four Altair charts have drawn their
lines and the script run is over; any page: its title is shown, the script run is over and every
Altair chart on it has drawn. Timed: navigation from the sidebar (the app already open, query cache
warm, the page's range set to one year in the session; median of repeats), and the first full page
load on a fresh server (empty cache: Streamlit's own start-up in the browser plus the store read).
Goals: under 2 s and under 4 s. Printed, never asserted.

Run: ``.venv/bin/python benchmarks/bench_dashboard.py`` (or ``make bench``); ``... pages`` times
every page only.
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
# Polled every 20 ms in the page's own main thread, so the cheap tests come first: reading the path
# data of every line at each poll (strings of tens of kB) cost the page about 1 s of its own time
# on a first load of the trends page
DRAWN = """() => {
  if (document.querySelector('[data-testid=stStatusWidget]')) return false;
  if (document.querySelectorAll('[data-testid=stMetricValue]').length < 4) return false;
  const charts = document.querySelectorAll('[data-testid=stVegaLiteChart]');
  if (charts.length < 4) return false;
  let lines = 0;
  for (const c of charts) {
    for (const p of c.querySelectorAll('.mark-line path')) {
      const d = p.getAttribute('d');
      if (d && d.length > 100) { lines++; break; }
    }
    if (lines >= 4) return true;
  }
  return false;
}"""


def build_store() -> str:
    url = f"sqlite:///{STORE}"
    if STORE.exists():
        try:
            if connect(url).watermark("R-210") is not None:
                from kinetrace.store import open_store

                open_store(url).close()       # a store built by an older kinetrace is upgraded (hourly summary)
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
    """Sidebar navigation first page -> Reactor trends, range kept in the session. [s]"""
    proc, base = serve.start({"KINETRACE_STORE_URL": url})
    times = []
    try:
        with tempfile.TemporaryDirectory() as profile:
            ctx, page = browser(p, profile)
            page.goto(f"{base}/trends?range={code}")
            page.wait_for_function(DRAWN, polling=20)
            check_caption(page, code == "365d")
            links = _nav_links(page)
            first = links[0]
            trends = next(lp for lp in links if lp[1].endswith("/trends"))
            for _ in range(REPEATS):
                _click(page, first)
                _drawn_on(page, first[1])
                t0 = time.perf_counter()
                _click(page, trends)
                page.wait_for_function(DRAWN, polling=20)
                times.append(time.perf_counter() - t0)
            ctx.close()
    finally:
        serve.stop(proc)
    return times


PAGE_DRAWN = """() => {
  if (!document.querySelector('h1') || document.querySelector('[data-testid=stStatusWidget]')) return false;
  const charts = [...document.querySelectorAll('[data-testid=stVegaLiteChart]')];
  return charts.every(c => c.querySelector('svg .mark-rect, svg .mark-line, svg .mark-symbol, svg .mark-area, canvas'))
    && document.querySelectorAll('[data-testid=stMetricValue], [data-testid=stVegaLiteChart], [data-testid=stAlert]').length > 0;
}"""


def _nav_links(page) -> list[tuple[str, str, str]]:
    """(label, path, href) of every sidebar page link."""
    return page.evaluate("""() => [...document.querySelectorAll('[data-testid=stSidebarNavLink]')]
        .map(a => [a.innerText.trim().split('\\n').pop(), new URL(a.href).pathname, a.getAttribute('href')])""")


def _click(page, link) -> None:
    page.locator(f'[data-testid=stSidebarNavLink][href$="{link[1]}"]').first.click()   # servers differ in port


SIGNATURE = """() => [document.querySelector('h1') ? document.querySelector('h1').innerText : '',
  document.querySelectorAll('[data-testid=stVegaLiteChart]').length,
  document.querySelectorAll('[data-testid=stMetricValue]').length]"""
SAME_AS = """s => { const h = document.querySelector('h1');
  return h && h.innerText === s[0] && document.querySelectorAll('[data-testid=stVegaLiteChart]').length >= s[1]
    && document.querySelectorAll('[data-testid=stMetricValue]').length >= s[2]; }"""


def _drawn_on(page, path: str, signature=None):
    """Wait until the page at ``path`` is fully drawn; with a ``signature`` (title, charts, metrics of
    the same page drawn before) also until it shows that title and at least as many charts."""
    page.wait_for_function("p => location.pathname === p", arg=path, polling=20)
    page.wait_for_timeout(50)                  # let the new run start before polling its end
    if signature is not None:
        page.wait_for_function(SAME_AS, arg=signature, polling=20)
    page.wait_for_function(PAGE_DRAWN, polling=20)
    return page.evaluate(SIGNATURE)


def every_page(p, url: str) -> dict[str, tuple[float, float]]:
    """Per page: (first load on a fresh server, median sidebar navigation), one-year range. [s]"""
    proc, base = serve.start({"KINETRACE_STORE_URL": url})
    signatures = {}
    try:
        with tempfile.TemporaryDirectory() as profile:
            ctx, page = browser(p, profile)
            page.goto(f"{base}/?range=365d")
            page.wait_for_function(PAGE_DRAWN, polling=20)
            links = _nav_links(page)
            # each page as it stands when complete (title, charts, metrics): Streamlit shows its
            # "running" sign only after a delay, so a page part-way through its run can look drawn;
            # a timed load counts as drawn only once it shows all of this
            for label, path, href in links:
                page.goto(f"{base}{path}?range=365d")
                _drawn_on(page, path)
                page.wait_for_timeout(1500)
                signatures[path] = _drawn_on(page, path)
            ctx.close()
    finally:
        serve.stop(proc)
    out = {}
    for label, path, href in links:
        proc, base = serve.start({"KINETRACE_STORE_URL": url})
        try:
            with tempfile.TemporaryDirectory() as profile:
                ctx, page = browser(p, profile)
                page.goto(f"{base}/_stcore/health")
                t0 = time.perf_counter()
                page.goto(f"{base}{path}?range=365d")
                sig = _drawn_on(page, path, signatures[path])
                cold = time.perf_counter() - t0
                other = next(lp for lp in links if lp[1] != path)
                times = []
                for _ in range(REPEATS):
                    _click(page, other)
                    _drawn_on(page, other[1])
                    t0 = time.perf_counter()
                    _click(page, (label, path, href))
                    _drawn_on(page, path, sig)
                    times.append(time.perf_counter() - t0)
                ctx.close()
        finally:
            serve.stop(proc)
        out[label] = (cold, statistics.median(times))
    return out


def thinning() -> list[str]:
    """Chart thinning of one series to 1,000 points: tsdownsample against the NumPy LTTB it replaced. [s]"""
    import numpy as np

    from kinedash.downsample import minmaxlttb_indices
    from tests.dashboard.thinning_reference import numpy_lttb_indices

    lines = []
    rng = np.random.default_rng(0)
    for n in (20_000, 525_600):
        x = 60.0 * np.arange(n)
        y = np.cumsum(rng.standard_normal(n))
        res = {}
        for name, f in (("NumPy LTTB (baseline)", lambda: numpy_lttb_indices(x, y, 1000)),
                        ("tsdownsample MinMaxLTTB", lambda: minmaxlttb_indices(x, y, 1000))):
            f()
            t0 = time.perf_counter()
            for _ in range(5):
                f()
            res[name] = (time.perf_counter() - t0) / 5
        base_t, new_t = res["NumPy LTTB (baseline)"], res["tsdownsample MinMaxLTTB"]
        lines.append(f"  {n:,} points: NumPy LTTB {1000 * base_t:.1f} ms, tsdownsample MinMaxLTTB "
                     f"{1000 * new_t:.2f} ms, speed-up {base_t / new_t:.0f}x")
    return lines


def main() -> None:
    url = build_store()
    if sys.argv[1:] == ["pages"]:              # every page only
        from playwright.sync_api import sync_playwright

        with sync_playwright() as p:
            _print_pages(every_page(p, url))
        return
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
        pages = every_page(p, url)

    def line(what, d):
        return (f"  {what}: one week {d['7d']:.2f} s, one year {d['365d']:.2f} s, "
                f"ratio year/week {d['365d'] / d['7d']:.2f}")

    print("'Reactor trends' of R-210 fully drawn (4 metrics, 4 charts), one year of 1-minute results "
          "(525,600 rows per series) against a one-week window; goal: one year under 2 s")
    print(line(f"navigation from the sidebar (median of {REPEATS}, query cache warm)", nav))
    print(line("first full page load on a fresh server (empty query cache)", cold))
    print(line("server-side store read of the page's 11 series, no browser", read))
    _print_pages(pages)
    print("Chart thinning of one series to 1,000 points (median of 5)")
    print("\n".join(thinning()))


def _print_pages(pages) -> None:
    print("Every page, one year of 1-minute results (range 'last 365 days' where the page has one); "
          "goals: navigation under 2 s, first load on a fresh server under 4 s")
    for label, (c, n) in pages.items():
        print(f"  {label:<28} navigation (median of {REPEATS}) {n:.2f} s, first load {c:.2f} s, "
              f"ratio to the goals {n / 2.0:.2f} and {c / 4.0:.2f}")


if __name__ == "__main__":
    main()
