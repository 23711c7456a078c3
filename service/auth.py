"""Check API keys: create, list and revoke them in Redis, and guard every request with one.

A key looks like ``bw_<key id>_<secret>``. The key id (12 hex digits) is not
secret: it names the key in listings, logs and ``boundwise keys revoke``. The
whole key is shown once, when it is made; Redis keeps only its SHA-256 (keys
are 256-bit random strings, so a fast hash is enough: there is nothing to
guess from it). Each key belongs to one tenant, and a tenant sees only the
jobs it submitted: another tenant's job id answers 404, exactly like an id that
was never issued, so ids cannot be probed.

Redis layout (prefix ``boundwise:auth:``)::

    key:<sha256 of the key>  hash {key_id, tenant, created_at}
    id:<key id>              string: the sha256 above
    ids                      set of every key id

With ``AUTH_REQUIRED`` false (the embedded local mode, ``boundwise serve
--no-auth``) every request acts for the tenant ``LOCAL_TENANT``.
"""

from __future__ import annotations

import hashlib
import logging
import re
import secrets
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from flask import Flask, Response, current_app, g, jsonify, request

from service.errors import error_body

logger = logging.getLogger(__name__)

__all__ = [
    "ApiKey", "Principal", "KeyStore", "KeyNotFound", "init_app", "current_principal", "current_tenant",
    "can_see", "LOCAL_TENANT", "TENANT_PATTERN",
]

REDIS_PREFIX = "boundwise:auth:"
KEY_PREFIX = "bw_"
LOCAL_TENANT = "local"
# Tenant names end up in log lines, metric-free Redis key names and listings:
# keep them to a plain, short alphabet so none of those needs escaping.
TENANT_PATTERN = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$")
_KEY_ID = re.compile(r"^[0-9a-f]{12}$")
_KEY_SHAPE = re.compile(r"^bw_([0-9a-f]{12})_[A-Za-z0-9_-]{20,200}$")
# Paths a load balancer or Prometheus must reach without a tenant key.
DEFAULT_OPEN_PATHS = ("/healthz", "/readyz", "/metrics")


@dataclass(frozen=True, slots=True)
class ApiKey:
    """A stored key's public record: its id, its tenant and when it was made (Unix seconds)."""

    key_id: str
    tenant: str
    created_at: float


@dataclass(frozen=True, slots=True)
class Principal:
    """Who a request acts for: the tenant, and the key id (None when auth is off)."""

    tenant: str
    key_id: str | None


class KeyNotFound(LookupError):
    """Raised by ``KeyStore.revoke`` when no key, or more than one, matches."""


def digest(key: str) -> str:
    """Return the hex SHA-256 of a key, the only form in which keys are stored."""
    return hashlib.sha256(key.encode("utf-8")).hexdigest()


def check_tenant(tenant: str) -> str:
    """Return ``tenant`` if it is a valid tenant name, else raise ValueError naming the rule."""
    if not isinstance(tenant, str) or not TENANT_PATTERN.match(tenant):
        raise ValueError("tenant: 1-64 characters of A-Z a-z 0-9 . _ -, starting with a letter or digit")
    return tenant


class KeyStore:
    """The API keys of every tenant, kept hashed in Redis."""

    def __init__(self, redis: Any, prefix: str = REDIS_PREFIX) -> None:
        self.redis = redis
        self.prefix = prefix

    def create(self, tenant: str) -> tuple[ApiKey, str]:
        """Make a new key for ``tenant``; return its record and the key itself (shown once)."""
        check_tenant(tenant)
        key_id = secrets.token_hex(6)
        key = f"{KEY_PREFIX}{key_id}_{secrets.token_urlsafe(32)}"
        record = ApiKey(key_id=key_id, tenant=tenant, created_at=time.time())
        hashed = digest(key)
        pipe = self.redis.pipeline()
        pipe.hset(self.prefix + "key:" + hashed,
                  mapping={"key_id": key_id, "tenant": tenant, "created_at": repr(record.created_at)})
        pipe.set(self.prefix + "id:" + key_id, hashed)
        pipe.sadd(self.prefix + "ids", key_id)
        pipe.execute()
        logger.info("api key %s created for tenant %s", key_id, tenant)
        return record, key

    def verify(self, key: str) -> Principal | None:
        """Return the principal of ``key``, or None if it is malformed, unknown or revoked."""
        if not isinstance(key, str) or not _KEY_SHAPE.match(key):
            return None
        fields = self.redis.hgetall(self.prefix + "key:" + digest(key))
        if not fields:
            return None
        fields = {_text(k): _text(v) for k, v in fields.items()}
        return Principal(tenant=fields["tenant"], key_id=fields["key_id"])

    def list(self, tenant: str | None = None) -> list[ApiKey]:
        """Return every live key (of ``tenant`` if given), oldest first."""
        out = []
        for key_id in sorted(_text(k) for k in self.redis.smembers(self.prefix + "ids")):
            record = self._record(key_id)
            if record is not None and (tenant is None or record.tenant == tenant):
                out.append(record)
        return sorted(out, key=lambda r: (r.created_at, r.key_id))

    def revoke(self, id_or_prefix: str) -> ApiKey:
        """Revoke the one key whose id starts with ``id_or_prefix`` (a full key works too)."""
        wanted = _key_id_part(id_or_prefix)
        if len(wanted) < 4:
            raise KeyNotFound("give at least 4 characters of the key id")
        ids = sorted(_text(k) for k in self.redis.smembers(self.prefix + "ids"))
        matches = [k for k in ids if k.startswith(wanted)]
        if not matches:
            raise KeyNotFound(f"no key id starts with {wanted!r}")
        if len(matches) > 1:
            raise KeyNotFound(f"{len(matches)} key ids start with {wanted!r}; give more characters")
        key_id = matches[0]
        record = self._record(key_id)
        hashed = self.redis.get(self.prefix + "id:" + key_id)
        pipe = self.redis.pipeline()
        if hashed is not None:
            pipe.delete(self.prefix + "key:" + _text(hashed))
        pipe.delete(self.prefix + "id:" + key_id)
        pipe.srem(self.prefix + "ids", key_id)
        pipe.execute()
        logger.info("api key %s revoked", key_id)
        return record or ApiKey(key_id=key_id, tenant="", created_at=0.0)

    def _record(self, key_id: str) -> ApiKey | None:
        hashed = self.redis.get(self.prefix + "id:" + key_id)
        if hashed is None:
            return None
        fields = self.redis.hgetall(self.prefix + "key:" + _text(hashed))
        if not fields:
            return None
        fields = {_text(k): _text(v) for k, v in fields.items()}
        return ApiKey(key_id=key_id, tenant=fields["tenant"], created_at=float(fields["created_at"]))


def _text(value: Any) -> str:
    return value.decode("utf-8") if isinstance(value, bytes) else str(value)


def _key_id_part(text: str) -> str:
    """Return the key-id part of a key id, an id prefix, ``bw_<id>`` or a whole key."""
    text = text.strip()
    if text.startswith(KEY_PREFIX):
        text = text[len(KEY_PREFIX):].split("_", 1)[0]
    return text.lower()


def bearer_token() -> str | None:
    """Return the token of an ``Authorization: Bearer ...`` header, or None."""
    header = request.headers.get("Authorization", "")
    scheme, _, token = header.partition(" ")
    if scheme.lower() != "bearer" or not token.strip():
        return None
    return token.strip()


def current_principal() -> Principal:
    """Return who the current request acts for (the local tenant when auth is off)."""
    principal = g.get("principal")
    if principal is None:
        return Principal(tenant=LOCAL_TENANT, key_id=None)
    return principal


def current_tenant() -> str:
    """Return the tenant of the current request."""
    return current_principal().tenant


def can_see(owner: str | None) -> bool:
    """Tell whether the current request may see a job owned by ``owner``.

    A job with no recorded owner was made in the local mode; with auth on it is
    visible to nobody, so turning auth on never exposes old local jobs.
    """
    if not current_app.config.get("AUTH_REQUIRED", True):
        return True
    return owner is not None and owner == current_tenant()


def _unauthorized(message: str) -> Response:
    response = jsonify(error_body("unauthorized", message, "Authorization"))
    response.status_code = 401
    response.headers["WWW-Authenticate"] = 'Bearer realm="boundwise"'
    return response


def init_app(app: Flask, store: Callable[[], KeyStore]) -> None:
    """Guard every request of ``app`` with an API key unless ``AUTH_REQUIRED`` is false.

    ``store`` returns the KeyStore to check against (called per request, so
    the app's Redis connection can be made lazily). Paths in
    ``AUTH_OPEN_PATHS`` (health, readiness, metrics) need no key.
    """
    app.config.setdefault("AUTH_REQUIRED", True)
    app.config.setdefault("AUTH_OPEN_PATHS", DEFAULT_OPEN_PATHS)
    if not app.config["AUTH_REQUIRED"]:
        logger.warning("API keys are off: every caller acts as tenant %r and sees every job", LOCAL_TENANT)

    @app.before_request
    def _require_key() -> Response | None:
        if not app.config["AUTH_REQUIRED"]:
            g.principal = Principal(tenant=LOCAL_TENANT, key_id=None)
            return None
        if request.path in app.config["AUTH_OPEN_PATHS"] or request.method == "OPTIONS":
            return None
        token = bearer_token()
        if token is None:
            return _unauthorized("an API key is required: send 'Authorization: Bearer <key>'")
        principal = store().verify(token)
        if principal is None:
            return _unauthorized("the API key is not valid (unknown, malformed or revoked)")
        g.principal = principal
        return None
