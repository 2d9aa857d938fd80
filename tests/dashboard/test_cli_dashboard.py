"""`kinetrace dashboard`: the Streamlit command it runs (loopback, headless) and the store it names."""

import subprocess

from typer.testing import CliRunner

from kinetrace.cli import app

from .conftest import APP, ROOT


def test_dashboard_command(monkeypatch):
    seen = {}

    def fake_call(cmd, env):
        seen.update(cmd=cmd, env=env)
        return 0

    monkeypatch.setattr(subprocess, "call", fake_call)
    res = CliRunner().invoke(app, ["dashboard", "--config", str(ROOT / "config" / "demo_plant.toml"),
                                   "--store-url", "sqlite:////srv/kt/results.sqlite", "--port", "8611"])
    assert res.exit_code == 0, res.output
    cmd = seen["cmd"]
    assert cmd[1:4] == ["-m", "streamlit", "run"] and cmd[4] == str(APP)
    assert cmd[cmd.index("--server.address") + 1] == "127.0.0.1"
    assert cmd[cmd.index("--server.port") + 1] == "8611"
    assert cmd[cmd.index("--server.headless") + 1] == "true"
    assert seen["env"]["KINETRACE_STORE_URL"] == "sqlite:////srv/kt/results.sqlite"
    assert seen["env"]["KINETRACE_CONFIG"].endswith("demo_plant.toml")
    assert "http://127.0.0.1:8611/" in res.output
