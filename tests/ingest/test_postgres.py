import pytest
import sqlalchemy as sa


@pytest.mark.postgres
def test_server_answers(pg_url):
    eng = sa.create_engine(pg_url)
    with eng.connect() as c:
        assert c.execute(sa.text("select 1 + 1")).scalar() == 2
    eng.dispose()


def test_missing_binaries_fail_with_the_install_hint(monkeypatch):
    from tests import pg_server

    monkeypatch.setattr(pg_server, "find_bindir", lambda: None)
    with pytest.raises(RuntimeError, match=r"`make test` installs them \(apt-get install postgresql\)"):
        pg_server.start_cluster()


def test_binaries_are_found_here():
    from tests import pg_server

    b = pg_server.find_bindir()
    assert b is not None and (b / "initdb").exists() and (b / "pg_ctl").exists()
