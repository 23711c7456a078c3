"""`boundwise keys create|list|revoke`: manage the API keys tenants use to reach the service.

``create TENANT`` prints the new key alone on standard output (so a script can
capture it) and its id on standard error; the key is never shown again.
``list`` prints one line per key: id, tenant, creation time. ``revoke`` takes a
key id, a unique prefix of one, or the key itself. Exit status 0 on success, 1
when nothing matched or Redis cannot be reached, 2 for a bad tenant name.
"""

from __future__ import annotations

import argparse
import sys
from datetime import datetime, timezone
from typing import Any

def register(sub: Any) -> None:
    """Add the ``keys`` subcommand and its three verbs."""
    p = sub.add_parser("keys", help="create, list or revoke API keys",
                       description="Manage API keys; each key belongs to one tenant.")
    p.add_argument("--redis-url", default=None,
                   help="Redis holding the keys (default: $REDIS_URL, else redis://127.0.0.1:6379/0)")
    verbs = p.add_subparsers(dest="verb", metavar="VERB", required=True)
    create = verbs.add_parser("create", help="make a key for TENANT and print it")
    create.add_argument("tenant", metavar="TENANT")
    create.set_defaults(func=_create)
    lister = verbs.add_parser("list", help="list live keys (ids only, never the keys)")
    lister.add_argument("--tenant", default=None, help="only this tenant's keys")
    lister.set_defaults(func=_list)
    revoke = verbs.add_parser("revoke", help="revoke a key by id, id prefix or the key itself")
    revoke.add_argument("key", metavar="KEY_ID_OR_PREFIX")
    revoke.set_defaults(func=_revoke)


def _store(args: argparse.Namespace) -> Any:
    import redis
    from redis.backoff import NoBackoff
    from redis.retry import Retry

    from service.auth import KeyStore

    from service.config import load

    url = args.redis_url or load().redis_url  # REDIS_URL, checked like every other setting
    # One quick retry: an operator at a prompt wants the error, not a long wait.
    return KeyStore(redis.Redis.from_url(url, socket_connect_timeout=5, socket_timeout=5,
                                         retry=Retry(NoBackoff(), 1)))


def _fail(message: str, status: int = 1) -> int:
    sys.stderr.write(f"error: {message}\n")
    return status


def _create(args: argparse.Namespace) -> int:
    import redis

    try:
        record, key = _store(args).create(args.tenant)
    except ValueError as err:
        return _fail(str(err), 2)
    except redis.RedisError as err:
        return _fail(f"cannot reach Redis: {err}")
    sys.stdout.write(key + "\n")
    sys.stdout.flush()
    sys.stderr.write(f"created key {record.key_id} for tenant {record.tenant}; it is shown only this once\n")
    return 0


def _list(args: argparse.Namespace) -> int:
    import redis

    try:
        records = _store(args).list(args.tenant)
    except ValueError as err:  # a bad setting (service.config.ConfigError names it)
        return _fail(str(err), 2)
    except redis.RedisError as err:
        return _fail(f"cannot reach Redis: {err}")
    for r in records:
        made = datetime.fromtimestamp(r.created_at, timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
        sys.stdout.write(f"{r.key_id}\t{r.tenant}\t{made}\n")
    return 0


def _revoke(args: argparse.Namespace) -> int:
    import redis

    from service.auth import KeyNotFound

    try:
        record = _store(args).revoke(args.key)
    except KeyNotFound as err:
        return _fail(str(err))
    except ValueError as err:  # a bad setting (service.config.ConfigError names it)
        return _fail(str(err), 2)
    except redis.RedisError as err:
        return _fail(f"cannot reach Redis: {err}")
    sys.stderr.write(f"revoked key {record.key_id} of tenant {record.tenant}\n")
    return 0
