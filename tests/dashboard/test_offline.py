"""The served dashboard loads nothing from outside the machine: every page opened in Debian chromium
with every non-loopback request blocked (and recorded), its icons drawn from the bundled font."""

import shutil
import tempfile
from urllib.parse import urlsplit

import pytest

from kinedash import serve

from .test_browser import CHROMIUM, CHROMIUM_ARGS, ERRORS

pytestmark = pytest.mark.browser

PATHS = ["", "trends", "balances", "kinetics", "quality", "whatif"]
LOOPBACK = ("127.0.0.1", "localhost", "::1", "[::1]")


def test_no_request_leaves_the_machine(hourly_url, tmp_path):
    from playwright.sync_api import expect, sync_playwright

    if not CHROMIUM.exists():
        pytest.fail(f"Debian chromium not found at {CHROMIUM}")
    log = open(tmp_path / "server.log", "wb")
    proc, base = serve.start({"KINETRACE_STORE_URL": hourly_url}, log=log)
    outside, local = [], []
    profile = tempfile.mkdtemp(prefix="kt-chromium-")
    try:
        with sync_playwright() as p:
            ctx = p.chromium.launch_persistent_context(profile, executable_path=str(CHROMIUM), headless=True,
                                                       args=CHROMIUM_ARGS, viewport={"width": 1400, "height": 1000})
            ctx.set_default_timeout(60_000)

            def route(r):
                url = r.request.url
                host = urlsplit(url).hostname or ""
                if url.startswith(("data:", "blob:")) or host in LOOPBACK:
                    local.append(url)
                    r.continue_()
                else:
                    outside.append(url)
                    r.abort()

            ctx.route("**/*", route)
            page = ctx.new_page()
            for path in PATHS:
                page.goto(f"{base}/{path}")
                page.locator("h1").first.wait_for()
                page.wait_for_function("() => !document.querySelector('[data-testid=stStatusWidget]')")
                page.wait_for_timeout(500)
                expect(page.locator(ERRORS)).to_have_count(0)
                # every sidebar icon is drawn by the bundled Material Symbols font
                assert page.locator("[data-testid=stSidebarNav] [data-testid=stIconMaterial]").count() == len(PATHS)
                assert page.evaluate("() => document.fonts.check('24px \"Material Symbols Rounded\"')")
            ctx.close()
    finally:
        serve.stop(proc)
        log.close()
        shutil.rmtree(profile, ignore_errors=True)
    assert local, "no page was loaded"
    # a ':material/...' page icon in st.set_page_config (dashboards/app.py) makes the browser fetch the
    # favicon from a font host; an emoji page icon is drawn as a data: URL, a file path is served locally
    assert not outside, f"requests to outside the machine: {sorted(set(outside))}"
