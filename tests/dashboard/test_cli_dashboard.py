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
    # Streamlit's own "run", through the launcher that imports the pages' modules first
    assert cmd[1] == str(APP.with_name("launch.py")) and cmd[2] == "run" and cmd[3] == str(APP)
    assert cmd[cmd.index("--server.address") + 1] == "127.0.0.1"
    assert cmd[cmd.index("--server.port") + 1] == "8611"
    assert cmd[cmd.index("--server.headless") + 1] == "true"
    assert seen["env"]["KINETRACE_STORE_URL"] == "sqlite:////srv/kt/results.sqlite"
    assert seen["env"]["KINETRACE_CONFIG"].endswith("demo_plant.toml")
    assert "http://127.0.0.1:8611/" in res.output


def _never_called(*a, **kw):
    raise AssertionError("streamlit must not be started")


def test_dashboard_refuses_a_config_it_cannot_load(monkeypatch, tmp_path):
    monkeypatch.setattr(subprocess, "call", _never_called)
    bad = tmp_path / "plant.toml"
    bad.write_text("[site\nname = 'x'\n")
    for config in (tmp_path / "not_there.toml", bad):
        res = CliRunner().invoke(app, ["dashboard", "--config", str(config), "--port", "8612"])
        assert res.exit_code == 2, res.output
        assert f"configuration {config} cannot be loaded" in res.output
        assert "http://" not in res.output and "Traceback" not in res.output


def test_dashboard_refuses_a_busy_port(monkeypatch):
    import socket

    monkeypatch.setattr(subprocess, "call", _never_called)
    with socket.socket() as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen()
        port = busy.getsockname()[1]
        res = CliRunner().invoke(app, ["dashboard", "--config", str(ROOT / "config" / "demo_plant.toml"),
                                       "--port", str(port)])
    assert res.exit_code == 2, res.output
    assert f"port {port} on 127.0.0.1 is not free" in res.output and "http://" not in res.output
    res = CliRunner().invoke(app, ["dashboard", "--port", "70000"])
    assert res.exit_code == 2 and "not a TCP port" in res.output
