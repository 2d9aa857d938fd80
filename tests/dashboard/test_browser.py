"""The dashboard in a real browser: Debian chromium driven by Playwright, app served on loopback.

Each page: loads, shows a key number equal to the store's, a widget interaction updates it,
a screenshot is saved under tests/artefacts/dashboard/, and no error element is on the page.
"""

import shutil
import tempfile
from pathlib import Path

import pandas as pd
import pytest

from kinedash import serve
from kinetrace.store import open_store

from .conftest import ARTEFACTS, END

pytestmark = pytest.mark.browser

CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--no-first-run"]
ERRORS = "[data-testid=stException], [data-testid=stAlertContentError]"


@pytest.fixture(scope="module")
def browser_page():
    if not CHROMIUM.exists():
        pytest.fail(f"Debian chromium not found at {CHROMIUM}: `make test` installs it "
                    "(apt-get install chromium); the browser tests never download a browser")
    from playwright.sync_api import sync_playwright

    profile = tempfile.mkdtemp(prefix="kt-chromium-")
    with sync_playwright() as p:
        ctx = p.chromium.launch_persistent_context(profile, executable_path=str(CHROMIUM), headless=True,
                                                   args=CHROMIUM_ARGS, viewport={"width": 1400, "height": 1000})
        ctx.set_default_timeout(30_000)
        page = ctx.new_page()
        yield page
        ctx.close()
    shutil.rmtree(profile, ignore_errors=True)


@pytest.fixture(scope="module")
def served(hourly_url, tmp_path_factory):
    log = open(tmp_path_factory.mktemp("streamlit") / "server.log", "wb")
    proc, base = serve.start({"KINETRACE_STORE_URL": hourly_url}, log=log)
    yield base
    serve.stop(proc)
    log.close()


@pytest.fixture(scope="module")
def store(hourly_url):
    return open_store(hourly_url, create=False)


def metric_value(page, label: str):
    return page.locator("[data-testid=stMetric]", has_text=label).locator("[data-testid=stMetricValue]")


def open_page(page, base: str, path: str, label: str, charts: int = 0):
    page.goto(f"{base}/{path}")
    metric_value(page, label).wait_for()
    if charts:
        page.wait_for_function(
            "n => [...document.querySelectorAll('[data-testid=stVegaLiteChart]')]"
            ".filter(e => e.querySelector('svg, canvas')).length >= n", arg=charts)


def finish(page, name: str):
    from playwright.sync_api import expect

    expect(page.locator(ERRORS)).to_have_count(0)
    ARTEFACTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(ARTEFACTS / f"{name}.png"), full_page=True)
    assert (ARTEFACTS / f"{name}.png").stat().st_size > 10_000


def click_radio(page, text: str):
    page.locator("[data-testid=stRadio] label", has_text=text).first.click()


def offline(page) -> list:
    """Block every request that does not go to the loopback server; returns the list of blocked URLs."""
    blocked = []

    def route(r):
        url = r.request.url
        if url.startswith(("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:")):
            return r.continue_()
        blocked.append(url)
        return r.abort()

    page.route("**/*", route)
    return blocked


def tall_screenshot(page, name: str, height: int):
    """A screenshot of the whole page (Streamlit scrolls inside its own container: the viewport grows)."""
    page.set_viewport_size({"width": 1400, "height": height})
    page.wait_for_function("() => !document.querySelector('[data-stale=true]')")   # the rerun has finished
    page.wait_for_timeout(800)
    finish(page, name)
    page.set_viewport_size({"width": 1400, "height": 1000})


def test_overview(browser_page, served, store):
    from playwright.sync_api import expect

    page = browser_page
    blocked = offline(page)
    daily = store.daily("R-210")
    open_page(page, served, "", "R-210 produced", charts=4)
    expect(metric_value(page, "R-210 produced")).to_have_text(f"{daily['production_kg'].iloc[-1] / 1000:.2f}")
    click_radio(page, "last 7 days")
    expect(metric_value(page, "R-210 produced")).to_have_text(f"{daily['production_kg'].iloc[-7:].mean() / 1000:.2f}")
    # a status mark (shape and colour) per unit, the open alarm named with how long, the run read
    expect(page.locator("svg[aria-label='on target']")).to_have_count(2)
    expect(page.get_by_text("R210-FT-101 reads about +0.042 m3/h since 24 Nov: open 5 d", exact=False)).to_be_visible()
    expect(page.get_by_text("expected 8 Jan 2027 (interval 31 Dec 2026 to 17 Jan 2027)", exact=False)).to_be_visible()
    expect(page.get_by_text("Results of run 1, the last complete run", exact=False)).to_be_visible()
    assert "+00:00" not in page.locator("[data-testid=stMain]").inner_text()
    tall_screenshot(page, "01_morning_verdict", 1800)
    page.unroute_all()
    assert blocked == [], blocked


def test_reactor_trends(browser_page, served, store):
    from playwright.sync_api import expect

    page = browser_page
    blocked = offline(page)
    open_page(page, served, "trends", "Mean conversion", charts=7)
    end = END - pd.Timedelta(hours=1) + pd.Timedelta("1us")
    conv = store.series("R-210", ["conversion"], end - pd.Timedelta(days=30), end)["conversion"].mean()
    expect(metric_value(page, "Mean conversion")).to_have_text(f"{conv:.4f}")
    # over 30 days the shared time axis reaches the forecast crossing (January 2027) until the toggle
    # takes it back to the last result
    ticks = page.locator("[data-testid=stVegaLiteChart] svg text", has_text="Jan")
    expect(ticks.first).to_be_visible()
    tall_screenshot(page, "02_reactor_trends", 2600)
    page.get_by_text("Time axis reaches the forecast crossing").click()
    expect(ticks).to_have_count(0)
    click_radio(page, "last 7 days")
    conv = store.series("R-210", ["conversion"], end - pd.Timedelta(days=7), end)["conversion"].mean()
    expect(metric_value(page, "Mean conversion")).to_have_text(f"{conv:.4f}")
    page.wait_for_function("() => document.querySelectorAll('[data-testid=stVegaLiteChart] svg').length >= 7")
    tall_screenshot(page, "02_reactor_trends_7_days", 2600)
    page.unroute_all()
    assert blocked == [], blocked


def test_balances(browser_page, served, store):
    from playwright.sync_api import expect

    page = browser_page
    open_page(page, served, "balances", "Largest global-test", charts=3)
    end = END - pd.Timedelta(hours=1) + pd.Timedelta("1us")
    for days in (7, 1):
        if days == 1:
            click_radio(page, "last 24 h")
        gt = store.series("R-210", ["global_test"], end - pd.Timedelta(days=days), end)["global_test"].max()
        expect(metric_value(page, "Largest global-test")).to_have_text(f"{gt:.3g}")
    # the flagged sensor's measurement is selected first, by a readable name
    picker = page.locator("[data-testid=stMultiSelect]", has_text="Measurements")
    expect(picker).to_contain_text("feed flow (R210-FT-101) - flagged")
    finish(page, "03_balances_and_sensors")


def test_kinetics(browser_page, served, store):
    from playwright.sync_api import expect

    from kinedash.arrhenius import steady_points

    page = browser_page
    open_page(page, served, "kinetics", "Steady periods in range", charts=2)
    end = END - pd.Timedelta(hours=1) + pd.Timedelta("1us")
    ea = store.parameters("R-210").set_index("name").loc["activation_energy:addition"]
    expect(metric_value(page, "Ea of the joint fit")).to_have_text(f"{ea['value'] / 1000:.1f}")
    for days in (90, 7):
        if days == 7:
            click_radio(page, "last 7 days")
        n = len(steady_points(store, "R-210", "k_apparent:addition", end - pd.Timedelta(days=days), end))
        expect(metric_value(page, "Steady periods in range")).to_have_text(str(n))
    # the 1000/T axis carries a handful of round ticks, not twenty
    n_ticks = page.evaluate("""() => { const ax = document.querySelector(`[aria-label^="X-axis titled '1000 / T"]`);
        return ax ? ax.querySelectorAll('.role-axis-label text').length : -1; }""")
    assert 2 <= n_ticks <= 6, n_ticks
    finish(page, "04_kinetics")


def test_data_quality(browser_page, served, store):
    from playwright.sync_api import expect

    page = browser_page
    q = store.quality("R-210")
    q = q[~q["measure"].isin(["rows_read", "good", "intervals", "missing_intervals"])]
    open_page(page, served, "quality", "Readings flagged", charts=1)
    for which in ("newest", "oldest"):
        p0 = q["period_start"].max() if which == "newest" else q["period_start"].min()
        if which == "oldest":
            page.locator("[data-testid=stSelectbox]", has_text="Period starting").click()
            page.get_by_role("option", name=p0.strftime("%Y-%m-%d %H:%M")).click()
        sel = q[q["period_start"] == p0]
        expect(metric_value(page, "Readings flagged")).to_have_text(str(sel["count"].sum()))
    finish(page, "05_data_quality")


def test_whatif(browser_page, served, store):
    from playwright.sync_api import expect

    from .test_pages import _library_prediction

    page = browser_page
    open_page(page, served, "whatif", "Predicted conversion", charts=1)
    expect(page.get_by_text("Estimates only.", exact=False)).to_have_count(1)          # the caution once
    expect(page.get_by_text("relief and runaway studies", exact=False)).to_be_visible()
    sliders = page.locator("[data-testid=stSlider] input[type=range]")
    expect(sliders).to_have_count(3)
    for i, presses in ((0, 25), (1, 40)):              # temperature +2.5 K, feed flow +0.40 m3/h
        sliders.nth(i).focus()
        for _ in range(presses):
            page.keyboard.press("ArrowRight")
        page.wait_for_timeout(1500)
    page.wait_for_function("() => !document.querySelector('[data-testid=stStatusWidget]')")
    vals = [float(sliders.nth(i).input_value()) for i in range(3)]
    p = _library_prediction(store, "R-210", {"temperature": vals[0] + 273.15, "feed_flow": vals[1] / 3600,
                                             "residence_time": vals[2] * 3600})
    expect(metric_value(page, "Predicted conversion")).to_have_text(f"{p.conversion:.4f}")
    expect(metric_value(page, "Predicted production")).to_have_text(f"{p.production_mass * 86.4:.2f}")
    for i in range(3):                                  # never outside the configured safe limits
        lo, hi = (float(sliders.nth(i).get_attribute(a)) for a in ("min", "max"))
        assert lo <= vals[i] <= hi
    assert (float(sliders.nth(0).get_attribute("min")), float(sliders.nth(0).get_attribute("max"))) == (45.0, 85.0)
    finish(page, "06_what_if")
