"""kinetrace dashboard: entry point (``streamlit run dashboards/app.py``, or ``kinetrace dashboard``).

Reads the results store named by ``KINETRACE_STORE_URL`` or by the plant configuration
in ``KINETRACE_CONFIG`` (default: the demo plant); see :mod:`kinedash.source`.
"""

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
for p in (HERE, HERE.parent / "src"):
    if str(p) not in sys.path:
        sys.path.insert(0, str(p))

import streamlit as st  # noqa: E402

def _icon():
    """The tab icon drawn here (a level bar on a base line, our own mark), so the browser fetches
    nothing from outside the machine (a named material icon is loaded from an internet host)."""
    from PIL import Image, ImageDraw

    im = Image.new("RGBA", (32, 32), (0, 0, 0, 0))
    d = ImageDraw.Draw(im)
    d.rectangle([6, 12, 26, 20], fill="#2e7d6b")
    d.rectangle([3, 24, 29, 26], fill="#1f2b33")
    return im


st.set_page_config(page_title="kinetrace reactor ledger", page_icon=_icon(), layout="wide")

PAGES = [
    st.Page(str(HERE / "views" / "overview.py"), title="Morning verdict", icon=":material/factory:",
            url_path="verdict", default=True),
    st.Page(str(HERE / "views" / "unit.py"), title="Reactor trends", icon=":material/show_chart:",
            url_path="trends"),
    st.Page(str(HERE / "views" / "balances.py"), title="Balances and sensors", icon=":material/balance:",
            url_path="balances"),
    st.Page(str(HERE / "views" / "kinetics.py"), title="Kinetics", icon=":material/function:",
            url_path="kinetics"),
    st.Page(str(HERE / "views" / "quality.py"), title="Data quality", icon=":material/fact_check:",
            url_path="quality"),
    st.Page(str(HERE / "views" / "whatif.py"), title="What-if (safe limits)", icon=":material/tune:",
            url_path="whatif"),
]

nav = st.navigation(PAGES)
st.sidebar.caption("kinetrace reactor ledger: read-only view of the results store.")
nav.run()
