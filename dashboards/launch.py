"""Start the dashboard's Streamlit server with the modules its pages use already imported.

Streamlit imports what a page uses during the first script run of the first browser session, so
the first page of a fresh server waited for Altair, SciPy, pint and kinetrace to be imported
(about two seconds of a four-second first load on the benchmark machine). Importing them here,
before the server answers its health check, moves that wait to start-up, as it does the map of
modules to files that Streamlit's first element of a process asks for (through ``inspect.stack()``). Nothing is read here:
the store is first read by a page, as before, and every page's query cache starts empty.

Usage (what :func:`kinedash.serve.streamlit_command` and ``kinetrace dashboard`` run)::

    python dashboards/launch.py run dashboards/app.py [Streamlit options]
"""

from __future__ import annotations

import importlib
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
for _p in (HERE, HERE.parent / "src"):
    if str(_p) not in sys.path:
        sys.path.insert(0, str(_p))

#: Modules the pages import (their own imports follow), and kinetrace.pipeline.feed, which the what-if
#: page's kinedash.setting imports inside a function (0.23 s on its first use).
WARM = ("numpy", "pandas", "altair", "PIL.ImageDraw", "scipy.stats", "kinetrace.units", "kinetrace.errors",
        "kinetrace.report.names", "kinetrace.report.verdict", "kinetrace.monitor.whatif", "kinedash.cached",
        "kinedash.ui", "kinedash.display", "kinedash.setting_cache", "kinedash.source", "kinedash.trends",
        "kinedash.morning", "kinedash.setting", "kinedash.labels", "kinedash.figures", "kinedash.evidence",
        "kinedash.charts", "kinedash.arrhenius", "kinetrace.pipeline.feed")


def warm() -> list[str]:
    """Import :data:`WARM`; returns the modules that could not be imported (the page then says why)."""
    import logging

    # a cached function defined outside a script run has its parameters checked against an
    # in-memory cache and Streamlit warns "No runtime found"; its cache is made at the first call,
    # in a page, by the server's runtime (streamlit.runtime.caching.cache_data_api.get_cache)
    importlib.import_module("streamlit.runtime.caching.cache_data_api")    # sets its logger's level
    quiet = logging.getLogger("streamlit.runtime.caching.cache_data_api")
    level = quiet.level
    quiet.setLevel(logging.ERROR)
    failed = []
    try:
        for name in WARM:
            try:
                importlib.import_module(name)
            except Exception:  # noqa: BLE001 - the page that needs it reports the problem itself
                failed.append(name)
    finally:
        quiet.setLevel(level)
    # the first element a page sends makes Streamlit call inspect.stack() once per process (its check
    # for an interactive session), which maps every imported module to its file: about 0.3 s with
    # the modules above; done here, the page finds the map made
    import inspect

    inspect.stack()
    return failed


def main(argv: list[str] | None = None) -> int:
    """Warm the imports, then run Streamlit's own command line with ``argv``."""
    warm()
    from streamlit.web import cli

    sys.argv = ["streamlit", *(sys.argv[1:] if argv is None else argv)]
    return cli.main()


if __name__ == "__main__":
    sys.exit(main())
