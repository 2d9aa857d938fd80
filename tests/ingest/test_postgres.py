import pytest
import sqlalchemy as sa


@pytest.mark.postgres
def test_server_answers(pg_url):
    eng = sa.create_engine(pg_url)
    with eng.connect() as c:
        assert c.execute(sa.text("select 1 + 1")).scalar() == 2
    eng.dispose()
