"""`boundwise keys`: create prints the key alone on stdout, list shows ids, revoke takes a prefix."""

from __future__ import annotations

import fakeredis
import pytest
import redis

from service import cli
from service.auth import KeyStore


@pytest.fixture()
def server(monkeypatch):
    fake = fakeredis.FakeServer()
    monkeypatch.setattr(redis.Redis, "from_url", classmethod(lambda cls, url, **kw: fakeredis.FakeRedis(server=fake)))
    return fake


def test_create_list_revoke_round_trip(server, capsys):
    assert cli.main(["keys", "create", "picking-east"]) == 0
    out, err = capsys.readouterr()
    key = out.strip()
    assert out == key + "\n", "stdout holds the key alone"
    store = KeyStore(fakeredis.FakeRedis(server=server))
    principal = store.verify(key)
    assert principal is not None and principal.tenant == "picking-east"
    assert principal.key_id in err

    assert cli.main(["keys", "list"]) == 0
    out, _ = capsys.readouterr()
    assert out.split("\t")[:2] == [principal.key_id, "picking-east"]
    assert key not in out

    assert cli.main(["keys", "revoke", principal.key_id[:6]]) == 0
    capsys.readouterr()
    assert store.verify(key) is None
    assert cli.main(["keys", "list"]) == 0
    assert capsys.readouterr().out == ""


def test_bad_tenant_and_unknown_key_fail_with_a_message(server, capsys):
    assert cli.main(["keys", "create", "no spaces"]) == 2
    assert "tenant" in capsys.readouterr().err
    assert cli.main(["keys", "revoke", "abcdef"]) == 1
    assert "no key id" in capsys.readouterr().err


def test_unreachable_redis_is_a_clear_error(monkeypatch, capsys):
    monkeypatch.setattr(redis.Redis, "from_url", classmethod(
        lambda cls, url, **kw: redis.Redis(host="127.0.0.1", port=1, **kw)))
    assert cli.main(["keys", "list"]) == 1
    assert "cannot reach Redis" in capsys.readouterr().err


def test_a_bad_redis_url_setting_is_named(monkeypatch, capsys):
    monkeypatch.setenv("REDIS_URL", "http://not-redis")
    for argv in (["keys", "list"], ["keys", "create", "t"], ["keys", "revoke", "abcd"]):
        assert cli.main(argv) == 2
        assert "REDIS_URL" in capsys.readouterr().err
