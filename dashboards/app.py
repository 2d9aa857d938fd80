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

st.set_page_config(page_title="kinetrace reactor ledger", page_icon=":material/science:", layout="wide")

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
