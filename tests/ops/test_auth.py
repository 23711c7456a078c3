"""API keys: made with a CSPRNG, stored hashed, tied to a tenant, revocable; the guard answers 401."""

from __future__ import annotations

import hashlib

import fakeredis
import pytest
from flask import Flask, jsonify

from service import auth
from service.auth import KeyNotFound, KeyStore


@pytest.fixture()
def store() -> KeyStore:
    return KeyStore(fakeredis.FakeRedis())


def test_a_created_key_verifies_to_its_tenant(store):
    record, key = store.create("picking-east")
    principal = store.verify(key)
    assert principal == auth.Principal(tenant="picking-east", key_id=record.key_id)
    assert key.startswith("bw_" + record.key_id + "_")


def test_keys_are_stored_only_as_their_sha256(store):  # common practice: never keep secrets in clear
    _, key = store.create("packing")
    r = store.redis
    dump = []
    for name in r.keys("*"):
        kind = r.type(name)
        dump.append(name)
        if kind == b"hash":
            dump.extend(r.hgetall(name).values())
        elif kind == b"set":
            dump.extend(r.smembers(name))
        else:
            dump.append(r.get(name))
    blob = b"\n".join(dump)
    secret = key.split("_", 2)[2].encode()  # the part after "bw_<key id>_"
    assert len(secret) >= 40 and secret not in blob and key.encode() not in blob
    assert hashlib.sha256(key.encode()).hexdigest().encode() in blob


def test_two_keys_never_collide_and_are_long(store):
    keys = {store.create("t")[1] for _ in range(50)}
    assert len(keys) == 50
    assert all(len(k) >= 3 + 12 + 1 + 43 for k in keys)  # 32 random bytes, url-safe base64


@pytest.mark.parametrize("bad", ["", "bw_", "bw_0123456789ab_short", "Bearer x", "bw_zzzzzzzzzzzz_" + "a" * 43,
                                 "bw_0123456789ab_" + "a" * 43])
def test_malformed_or_unknown_keys_do_not_verify(store, bad):
    store.create("t")
    assert store.verify(bad) is None


def test_revoke_by_prefix_removes_the_key(store):
    record, key = store.create("dispatch")
    other, other_key = store.create("dispatch")
    prefix = next(record.key_id[:n] for n in range(4, 13) if not other.key_id.startswith(record.key_id[:n]))
    revoked = store.revoke(prefix)
    assert revoked.key_id == record.key_id and revoked.tenant == "dispatch"
    assert store.verify(key) is None
    assert store.verify(other_key) is not None
    assert [r.key_id for r in store.list()] == [other.key_id]


def test_revoke_accepts_the_whole_key(store):
    record, key = store.create("dispatch")
    assert store.revoke(key).key_id == record.key_id
    assert store.verify(key) is None


def test_revoke_refuses_unknown_short_and_ambiguous(store):
    with pytest.raises(KeyNotFound, match="at least 4"):
        store.revoke("ab")
    with pytest.raises(KeyNotFound, match="no key id"):
        store.revoke("ffffffff0000")
    for _ in range(40):  # 40 random ids: two share their first hex digit for sure
        store.create("t")
    first = [r.key_id[0] for r in store.list()]
    shared = next(c for c in first if first.count(c) > 1)
    store.redis.sadd(store.prefix + "ids", shared * 4 + "00000000")
    store.redis.sadd(store.prefix + "ids", shared * 4 + "11111111")
    with pytest.raises(KeyNotFound, match="give more characters"):
        store.revoke(shared * 4)


def test_list_filters_by_tenant(store):
    a, _ = store.create("alpha")
    b, _ = store.create("beta")
    assert [r.key_id for r in store.list("alpha")] == [a.key_id]
    assert {r.tenant for r in store.list()} == {"alpha", "beta"}
    assert b.created_at >= a.created_at


@pytest.mark.parametrize("tenant", ["", "-lead", "a b", "x" * 65, "t/../x", "t:*", "ünï"])
def test_tenant_names_are_restricted(store, tenant):
    with pytest.raises(ValueError, match="tenant"):
        store.create(tenant)


def _app(store: KeyStore, required: bool = True) -> Flask:
    app = Flask("t")
    app.config["AUTH_REQUIRED"] = required
    auth.init_app(app, lambda: store)

    @app.get("/v1/whoami")
    def whoami():
        p = auth.current_principal()
        return jsonify(tenant=p.tenant, key_id=p.key_id)

    @app.get("/healthz")
    def health():
        return "ok"

    return app


def test_guard_answers_401_with_bearer_challenge(store):
    client = _app(store).test_client()
    for headers in ({}, {"Authorization": "Basic abc"}, {"Authorization": "Bearer bw_0123456789ab_" + "x" * 43}):
        r = client.get("/v1/whoami", headers=headers)
        assert r.status_code == 401
        assert r.headers["WWW-Authenticate"].startswith("Bearer")
        assert r.get_json()["error"]["code"] == "unauthorized"


def test_guard_lets_a_valid_key_through_and_health_needs_none(store):
    record, key = store.create("cell-3")
    client = _app(store).test_client()
    r = client.get("/v1/whoami", headers={"Authorization": f"Bearer {key}"})
    assert r.status_code == 200 and r.get_json() == {"tenant": "cell-3", "key_id": record.key_id}
    assert client.get("/healthz").status_code == 200
    store.revoke(record.key_id)
    assert client.get("/v1/whoami", headers={"Authorization": f"Bearer {key}"}).status_code == 401


def test_auth_off_acts_for_the_local_tenant(store):
    client = _app(store, required=False).test_client()
    r = client.get("/v1/whoami")
    assert r.status_code == 200 and r.get_json()["tenant"] == auth.LOCAL_TENANT


def test_can_see_only_own_jobs(store):
    _, key = store.create("alpha")
    app = _app(store)
    with app.test_request_context("/v1/whoami", headers={"Authorization": f"Bearer {key}"}):
        app.preprocess_request()
        assert auth.can_see("alpha")
        assert not auth.can_see("beta")
        assert not auth.can_see(None)
