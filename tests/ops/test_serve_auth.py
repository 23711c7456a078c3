"""`boundwise serve --no-auth` is for this machine only: refused on any address but loopback."""

from __future__ import annotations

import pytest

from service import cli


@pytest.mark.parametrize("host", ["0.0.0.0", "10.1.2.3", "::"])
def test_no_auth_is_refused_beyond_loopback(host, capsys, monkeypatch):
    monkeypatch.delenv("REDIS_URL", raising=False)
    assert cli.main(["serve", "--no-auth", "--host", host]) == 2
    err = capsys.readouterr().err
    assert "--no-auth" in err and host in err
