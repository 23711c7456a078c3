"""The in-memory Redis stand-in of `boundwise serve`: what RQ and the job store need of it works."""

from __future__ import annotations

import threading
import time

import pytest
import redis
from rq import Queue, SimpleWorker

from service.standin import StandIn


@pytest.fixture
def standin():
    s = StandIn().start()
    try:
        yield s
    finally:
        s.stop()


def test_rq_workers_register_and_run_jobs_against_the_stand_in(standin):
    conn = redis.Redis.from_url(standin.url)
    queue = Queue("default", connection=conn)
    job = queue.enqueue("builtins.sum", [1, 2, 3])
    worker = SimpleWorker([queue], connection=conn)  # asks CLIENT INFO for its own address
    assert ":" in worker.ip_address and "(" not in worker.ip_address
    worker.work(burst=True)
    # common practice: sum([1, 2, 3]) == 6
    assert job.return_value(refresh=True) == 6


def test_scripts_and_blocking_stream_reads_work_on_the_stand_in(standin):
    conn = redis.Redis.from_url(standin.url)
    assert conn.eval("return redis.call('INCRBY', KEYS[1], ARGV[1])", 1, "n", 41) == 41
    conn.xadd("s", {"a": "1"})
    other = redis.Redis.from_url(standin.url)
    writer = threading.Timer(0.2, lambda: other.xadd("s", {"b": "2"}))
    writer.start()
    started = time.monotonic()
    reply = conn.xread({"s": "$"}, block=3000)
    writer.join(5)
    assert reply and reply[0][1][0][1] == {b"b": b"2"} and time.monotonic() - started < 2.5
    conn.close()
    other.close()


def test_the_stand_in_is_gone_once_stopped():
    s = StandIn().start()
    url = s.url
    s.stop()
    with pytest.raises(redis.ConnectionError):
        redis.Redis.from_url(url, socket_connect_timeout=0.5, retry=None).ping()
