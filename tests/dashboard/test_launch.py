"""The launcher imports every module the pages import, before the server answers (dashboards/launch.py).

Checked against the pages' own source (read with the standard library's ast module): a module a
page imports at its top level and the launcher leaves out would be imported during the first
browser session again, which is what the launcher is there to avoid.
"""

import ast
import subprocess
import sys
from pathlib import Path

DASH = Path(__file__).resolve().parents[2] / "dashboards"
sys.path.insert(0, str(DASH))

import launch  # noqa: E402


def _top_level_imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = set()
    for node in tree.body:
        if isinstance(node, ast.Import):
            found |= {a.name for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module and not node.level:
            found.add(node.module)
    return found


def test_every_page_import_is_warmed():
    pages = sorted((DASH / "views").glob("*.py"))
    assert len(pages) == 6
    wanted = set().union(*(_top_level_imports(p) for p in pages)) - {"streamlit", "sys", "pathlib"}
    missing = sorted(m for m in wanted if m not in launch.WARM and not any(w.startswith(m + ".") for w in launch.WARM))
    assert not missing, f"pages import {missing}, which dashboards/launch.py does not import first"


def test_warm_imports_everything_quietly():
    """In a fresh interpreter: nothing fails to import, and no cache warning reaches the log."""
    code = "import launch, sys; failed = launch.warm(); print(failed); sys.exit(1 if failed else 0)"
    out = subprocess.run([sys.executable, "-c", code], cwd=DASH, capture_output=True, text=True, timeout=300,
                         env={"PYTHONPATH": f"{DASH}:{DASH.parent / 'src'}", "PATH": "/usr/bin:/bin"})
    assert out.returncode == 0, out.stdout + out.stderr
    assert "No runtime found" not in out.stderr
