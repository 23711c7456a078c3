"""`boundwise serve`: the whole service on one machine, in one command.

Without REDIS_URL it starts an in-memory Redis stand-in (``service.standin``)
in this process, the API under gunicorn (threaded workers, from
``deploy/gunicorn.conf.py``) and ``--workers`` search workers, all pointed at
it; API keys are off (one person, one machine) and nothing outlives the
command. With REDIS_URL set it starts only the API (add ``--workers N`` to run
workers here too; ``boundwise worker`` runs them anywhere else). Ctrl-C or
SIGTERM stops everything: the API first, then the workers, then the stand-in.
"""

from __future__ import annotations

import argparse
import logging
import os
import signal
import subprocess
import sys
import threading
import time
import urllib.request
from pathlib import Path
from typing import Any

logger = logging.getLogger(__name__)

GUNICORN_CONF = Path(__file__).resolve().parents[2] / "deploy" / "gunicorn.conf.py"


def register(sub: Any) -> None:
    """Add the ``serve`` subcommand."""
    p = sub.add_parser("serve", help="run the API (and, without REDIS_URL, Redis and workers) here",
                       description="Run the planning service on this machine.")
    p.add_argument("--host", default="127.0.0.1", help="address to listen on (default 127.0.0.1)")
    p.add_argument("--port", type=int, default=8080, help="port to listen on (default 8080)")
    p.add_argument("--workers", type=int, default=None, metavar="N",
                   help="search workers to start (default 2 without REDIS_URL, 0 with it)")
    p.add_argument("--web-workers", type=int, default=None, metavar="N",
                   help="gunicorn worker processes (default BOUNDWISE_WEB_WORKERS)")
    p.add_argument("--no-auth", action="store_true",
                   help="serve without API keys even with REDIS_URL (one person, one machine)")
    p.set_defaults(func=run)


def _gunicorn_command(host: str, port: int, web_workers: int | None) -> list[str]:
    cmd = [sys.executable, "-m", "gunicorn", "--bind", f"{host}:{port}"]
    if GUNICORN_CONF.is_file():
        cmd += ["--config", str(GUNICORN_CONF)]
    else:  # an installed package without the deploy folder: the same essentials by flag
        cmd += ["--worker-class", "gthread", "--threads", os.environ.get("BOUNDWISE_WEB_THREADS", "16")]
    if web_workers is not None:
        cmd += ["--workers", str(web_workers)]
    return [*cmd, "service.app:create_app()"]


def _up(url: str) -> bool:
    try:
        with urllib.request.urlopen(url + "/healthz", timeout=1) as response:
            return response.status == 200
    except OSError:
        return False


def _stop(procs: list[subprocess.Popen], grace: float) -> None:
    for proc in procs:
        if proc.poll() is None:
            proc.send_signal(signal.SIGTERM)
    deadline = time.monotonic() + grace
    for proc in procs:
        try:
            proc.wait(max(0.1, deadline - time.monotonic()))
        except subprocess.TimeoutExpired:
            # An RQ worker finishes its job on the first SIGTERM; the second stops it now.
            proc.send_signal(signal.SIGTERM)
    for proc in procs:
        try:
            proc.wait(3)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(3)


def run(args: argparse.Namespace) -> int:
    """Start the parts, print the URL, and stop them all on Ctrl-C, SIGTERM or a part's death."""
    from service.config import ConfigError, load
    from service.standin import StandIn

    try:
        load()
    except ConfigError as err:
        sys.stderr.write(f"error: {err}\n")
        return 2
    if not 0 < args.port < 65536 or (args.workers is not None and args.workers < 0):
        sys.stderr.write("error: --port must be 1-65535 and --workers at least 0\n")
        return 2
    local = args.host in ("127.0.0.1", "::1", "localhost")
    if args.no_auth and not local:
        # Without keys anyone who reaches the port can read every job: only on this machine.
        sys.stderr.write(f"error: --no-auth serves only on a loopback address (--host 127.0.0.1), "
                         f"not {args.host}\n")
        return 2
    env = dict(os.environ)
    standin = None
    if not env.get("REDIS_URL"):
        try:
            standin = StandIn().start()
        except (RuntimeError, OSError) as err:
            sys.stderr.write(f"error: {err}\n")
            return 1
        env["REDIS_URL"] = standin.url
        if local:
            env.setdefault("BOUNDWISE_AUTH", "off")
    if args.no_auth:
        env["BOUNDWISE_AUTH"] = "off"
    n_workers = args.workers if args.workers is not None else (2 if standin is not None else 0)
    stop = threading.Event()
    previous = {sig: signal.signal(sig, lambda *_: stop.set()) for sig in (signal.SIGINT, signal.SIGTERM)}
    api: subprocess.Popen | None = None
    workers: list[subprocess.Popen] = []
    status = 0
    try:
        # Own sessions: a terminal's Ctrl-C reaches only this process, which stops the parts in order.
        api = subprocess.Popen(_gunicorn_command(args.host, args.port, args.web_workers), env=env,
                               start_new_session=True)
        for i in range(n_workers):
            workers.append(subprocess.Popen(
                [sys.executable, "-m", "service.cli", "worker", "--name", f"serve-{os.getpid()}-{i + 1}"],
                env=env, start_new_session=True))
        url = f"http://{args.host}:{args.port}"
        deadline = time.monotonic() + 30
        while not _up(url):
            if stop.is_set() or api.poll() is not None or time.monotonic() > deadline:
                sys.stderr.write("error: the API did not start (see the messages above)\n")
                return 1
            time.sleep(0.1)
        where = f"in-memory Redis at {standin.url}" if standin is not None else "Redis from REDIS_URL"
        sys.stdout.write(f"Boundwise is serving on {url} ({where}; {n_workers} search workers). "
                         f"Ctrl-C stops it.\n")
        sys.stdout.flush()
        while not stop.wait(0.5):
            dead = [p for p in (api, *workers) if p.poll() is not None]
            if dead:
                sys.stderr.write(f"error: a part of the service stopped (pid {dead[0].pid}, "
                                 f"exit {dead[0].returncode}); stopping the rest\n")
                status = 1
                break
        return status
    finally:
        if api is not None:
            _stop([api], grace=10)
        _stop(workers, grace=5)
        if standin is not None:
            standin.stop()
        for sig, handler in previous.items():
            signal.signal(sig, handler)


if __name__ == "__main__":  # pragma: no cover
    from service.cli import main

    sys.exit(main(["serve", *sys.argv[1:]]))
