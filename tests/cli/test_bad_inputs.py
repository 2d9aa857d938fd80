"""Unusable inputs end in one clear line and exit code 2, never a traceback.

Durations out of range, an ``--out`` that is a file, a store file that is not a database, a store
driver that is not supported or not installed, and configuration files that are not readable TOML
(NUL bytes, UTF-16, nesting 5,000 levels deep, an unbalanced quote). Expected behaviour: the exit-code
contract of the README (common practice, no source); the TOML rules are those of the TOML 1.0.0
specification (UTF-8 text, LF or CRLF line ends).
"""

from pathlib import Path

import pytest
from typer.testing import CliRunner

from kinetrace.cli import app
from kinetrace.config import load_config
from kinetrace.errors import ConfigError
from tests.pipeline.demo import DEMO, demo_config


def _run(*args):
    res = CliRunner().invoke(app, [str(a) for a in args])
    out = res.stdout + (res.stderr if res.stderr_bytes is not None else "")
    assert "Traceback" not in out
    assert res.exception is None or isinstance(res.exception, SystemExit), repr(res.exception)
    return res.exit_code, out


def _config(tmp_path, old=None, new=None, **kw) -> Path:
    cfg = demo_config(tmp_path, tmp_path / "historian.sqlite", **kw)
    if old is not None:
        text = cfg.read_text()
        assert old in text
        cfg.write_text(text.replace(old, new, 1))
    return cfg


@pytest.mark.parametrize("value", ["0 s", "-1 h", "1e-9 s", "1e30 s", "2 d"])
def test_grid_out_of_range(tmp_path, value):
    cfg = _config(tmp_path, 'grid = "1 h"', f'grid = "{value}"')
    with pytest.raises(ConfigError) as err:
        load_config(cfg)
    msg = str(err.value)
    assert "analysis.grid" in msg and repr(value) in msg and "1 s to 1 d" in msg
    code, out = _run("check", "--config", cfg)
    assert code == 2 and "analysis.grid" in out and value in out


@pytest.mark.parametrize("old,new,key", [
    ('max_age = "20 min"', 'max_age = "-5 min"', "max_age"),
    ('max_age = "20 min"', 'max_age = "0 s"', "max_age"),
    ('dead_time = "1 min"', 'dead_time = "-1 min"', "dead_time"),
    ('dead_time = "1 min"', 'dead_time = "1e30 s"', "dead_time"),
])
def test_other_durations_out_of_range(tmp_path, old, new, key):
    cfg = _config(tmp_path, old, new)
    code, out = _run("check", "--config", cfg)
    assert code == 2 and key in out and "allowed" in out


@pytest.mark.parametrize("value", ["nan", "inf", "-inf", "0"])
def test_grid_as_a_bare_number_out_of_range(tmp_path, value):
    cfg = _config(tmp_path, 'grid = "1 h"', f"grid = {value}")
    code, out = _run("check", "--config", cfg)
    assert code == 2 and "analysis.grid" in out and "1 s to 1 d" in out


def test_durations_in_range_still_load(tmp_path):
    load_config(_config(tmp_path, 'grid = "1 h"', 'grid = "15 min"'))
    load_config(_config(tmp_path, 'dead_time = "1 min"', 'dead_time = "0 s"'))


def test_out_pointing_at_a_file(tmp_path):
    cfg = _config(tmp_path)
    target = tmp_path / "a-file.txt"
    target.write_text("not a folder")
    code, out = _run("check", "--config", cfg, "--out", target)
    assert code == 2 and "--out" in out and "a-file.txt" in out and "folder" in out
    assert target.read_text() == "not a folder"
    code, out = _run("report", "--config", cfg, "--out", target)
    assert code == 2 and "--out" in out


def test_output_dir_pointing_at_a_file(tmp_path):
    blocker = tmp_path / "blocker"
    blocker.write_text("x")
    cfg = _config(tmp_path, f'output_dir = "{tmp_path / "plant-out"}"', f'output_dir = "{blocker}"',
                  store_url=f"sqlite:///{tmp_path / 'results.sqlite'}")
    code, out = _run("check", "--config", cfg)
    assert code == 2 and "output folder" in out and "blocker" in out


def test_store_file_that_is_not_a_database(tmp_path):
    db = tmp_path / "results.sqlite"
    db.write_bytes(b"this is a text file, not a database\n" * 200)
    cfg = _config(tmp_path, store_url=f"sqlite:///{db}")
    for cmd in ("check", "report"):
        code, out = _run(cmd, "--config", cfg)
        assert code == 2 and "not a SQLite database" in out and "results.sqlite" in out, out


@pytest.mark.parametrize("url,words", [
    ("mysql+pymysql://kt@db.example/results", ["'mysql'", "not supported", "sqlite", "postgresql"]),
    ("postgresql+asyncpg://kt@127.0.0.1/results", ["asyncpg", "not supported", "psycopg"]),
    ("postgresql+pg8000://kt@127.0.0.1:1/results", ["pg8000", "not supported", "postgresql+psycopg"]),
    ("sqlite+aiosqlite:///results.sqlite", ["aiosqlite", "not supported", "sqlite+pysqlite"]),
    ("oracle://kt@db/results", ["'oracle'", "not supported"]),
])
def test_store_driver_unsupported_or_missing(tmp_path, url, words):
    cfg = _config(tmp_path, store_url=url)
    code, out = _run("check", "--config", cfg)
    assert code == 2, out
    for w in words:
        assert w in out, (w, out)


def _demo_text():
    return DEMO.read_text()


@pytest.mark.parametrize("name,content,words", [
    ("nul", b"\0" * 4096, ["NUL"]),
    ("utf16", _demo_text().encode("utf-16"), ["UTF-16", "UTF-8"]),
    ("latin1", "# caf\xe9\n".encode("latin-1") + _demo_text().encode(), ["UTF-8", "line 1"]),
    ("deep_arrays", ("a = " + "[" * 5000 + "]" * 5000 + "\n").encode(), ["nested", "deep"]),
    ("deep_tables", ("a = " + "{b = " * 5000 + "1" + "}" * 5000 + "\n").encode(), ["nested", "deep"]),
    ("quote", _demo_text().replace('timezone = "Europe/London"', 'timezone = "Europe/London', 1).encode(),
     ["TOML syntax", "line 9"]),
    ("empty", b"", ["site"]),
])
def test_unreadable_config_files(tmp_path, name, content, words):
    cfg = tmp_path / f"{name}.toml"
    cfg.write_bytes(content)
    code, out = _run("check", "--config", cfg)
    assert code == 2, out
    assert f"{name}.toml" in out
    for w in words:
        assert w in out, (w, out)


def test_bare_cr_line_ends_are_read_as_line_ends(tmp_path):
    cfg = _config(tmp_path)
    cfg.write_bytes(cfg.read_text().replace("\n", "\r").encode())
    assert load_config(cfg).units[0].id == "R-210"
    crlf = tmp_path / "crlf.toml"
    crlf.write_bytes(cfg.read_bytes().replace(b"\r", b"\r\n"))
    assert load_config(crlf).units[1].id == "R-220"


def test_config_that_is_a_folder_or_missing(tmp_path):
    code, out = _run("check", "--config", tmp_path)
    assert code == 2 and "not a file" in out
    code, out = _run("check", "--config", tmp_path / "nope.toml")
    assert code == 2 and "file not found" in out


def test_store_driver_not_installed(tmp_path):
    """psycopg made unimportable for one process (a module of that name that fails to import)."""
    import os
    import subprocess
    import sys

    fake = tmp_path / "site" / "psycopg"
    fake.mkdir(parents=True)
    (fake / "__init__.py").write_text("raise ModuleNotFoundError(\"No module named 'psycopg'\", name='psycopg')\n")
    cfg = _config(tmp_path, store_url="postgresql://kt@127.0.0.1:1/results")
    root = Path(__file__).resolve().parents[2]
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(fake.parent), str(root / "src")]))
    p = subprocess.run([sys.executable, "-m", "kinetrace.cli", "check", "--config", str(cfg)],
                       capture_output=True, text=True, env=env, timeout=300)
    assert p.returncode == 2, p.stderr
    assert "Traceback" not in p.stdout + p.stderr
    assert "not installed" in p.stderr and "pip install 'psycopg[binary]'" in p.stderr
