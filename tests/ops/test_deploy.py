"""Deploy files: they parse, start the right commands, probe the right paths and keep Redis safe."""

from __future__ import annotations

import configparser
import shlex
from pathlib import Path

import yaml

DEPLOY = Path(__file__).resolve().parents[2] / "deploy"
API_COMMAND = ["gunicorn", "--config", "/app/deploy/gunicorn.conf.py", "service.app:create_app()"]
WORKER_COMMAND = ["boundwise", "worker"]


def _docs(name: str) -> list[dict]:
    return [d for d in yaml.safe_load_all((DEPLOY / name).read_text()) if d]


def _unit(name: str) -> configparser.ConfigParser:
    parser = configparser.ConfigParser(strict=False, interpolation=None)
    parser.optionxform = str
    parser.read_string((DEPLOY / "systemd" / name).read_text())
    return parser


def _by_kind(docs: list[dict], kind: str, name: str) -> dict:
    return next(d for d in docs if d["kind"] == kind and d["metadata"]["name"] == name)


def test_compose_runs_api_workers_and_a_persistent_redis():
    compose = yaml.safe_load((DEPLOY / "compose.yaml").read_text())
    services = compose["services"]
    assert services["api"]["command"] == API_COMMAND
    assert services["worker"]["command"] == WORKER_COMMAND
    assert services["worker"]["deploy"]["replicas"] >= 2
    redis_cmd = services["redis"]["command"]
    # source: Redis persistence and eviction documentation (appendonly, noeviction) -- from memory
    assert redis_cmd[redis_cmd.index("--appendonly") + 1] == "yes"
    assert redis_cmd[redis_cmd.index("--maxmemory-policy") + 1] == "noeviction"
    assert any(v.startswith("redis-data:") for v in services["redis"]["volumes"])
    for role in ("api", "worker"):
        env = services[role]["environment"]
        assert env["REDIS_URL"].startswith("redis://redis:6379")
        assert env["PROMETHEUS_MULTIPROC_DIR"] == "/run/boundwise/metrics"
        assert "metrics:/run/boundwise/metrics" in services[role]["volumes"]
        assert services[role]["depends_on"]["metrics-init"]["condition"] == "service_completed_successfully"
    assert "/readyz" in " ".join(services["api"]["healthcheck"]["test"])


def test_kubernetes_api_probes_and_secret():
    docs = _docs("k8s/api.yaml")
    api = _by_kind(docs, "Deployment", "boundwise-api")["spec"]["template"]["spec"]["containers"][0]
    assert api["command"] == API_COMMAND
    assert api["livenessProbe"]["httpGet"]["path"] == "/healthz"
    assert api["readinessProbe"]["httpGet"]["path"] == "/readyz"
    redis_env = next(e for e in api["env"] if e["name"] == "REDIS_URL")
    assert redis_env["valueFrom"]["secretKeyRef"] == {"name": "boundwise-redis", "key": "REDIS_URL"}
    service = _by_kind(docs, "Service", "boundwise-api")
    assert service["spec"]["ports"][0]["targetPort"] == "http"
    secret = _by_kind(_docs("k8s/secret.example.yaml"), "Secret", "boundwise-redis")
    assert "REDIS_URL" in secret["stringData"]


def test_kubernetes_workers_use_the_same_secret_and_scale():
    dep = _by_kind(_docs("k8s/worker.yaml"), "Deployment", "boundwise-worker")
    pod = dep["spec"]["template"]["spec"]
    worker = pod["containers"][0]
    assert worker["command"] == WORKER_COMMAND
    assert dep["spec"]["replicas"] >= 2
    assert pod["terminationGracePeriodSeconds"] >= 30
    redis_env = next(e for e in worker["env"] if e["name"] == "REDIS_URL")
    assert redis_env["valueFrom"]["secretKeyRef"]["name"] == "boundwise-redis"


def test_kubernetes_redis_is_persistent_and_never_evicts():
    sts = _by_kind(_docs("k8s/redis.yaml"), "StatefulSet", "redis")
    command = " ".join(sts["spec"]["template"]["spec"]["containers"][0]["command"])
    assert "--appendonly yes" in command and "--maxmemory-policy noeviction" in command
    assert sts["spec"]["volumeClaimTemplates"][0]["metadata"]["name"] == "data"


def test_every_kubernetes_object_names_the_namespace():
    for path in sorted((DEPLOY / "k8s").glob("*.yaml")):
        for doc in _docs(f"k8s/{path.name}"):
            if doc["kind"] != "Namespace":
                assert doc["metadata"]["namespace"] == "boundwise", path.name


def test_systemd_units_run_the_api_and_templated_workers():
    api = _unit("boundwise-api.service")
    assert shlex.split(api["Service"]["ExecStart"])[1:] == [
        "--config", "/opt/boundwise/deploy/gunicorn.conf.py", "service.app:create_app()"]
    assert api["Service"]["ExecStart"].split()[0].endswith("/gunicorn")
    worker = _unit("boundwise-worker@.service")
    start = shlex.split(worker["Service"]["ExecStart"])
    assert start[0].endswith("/boundwise") and start[1] == "worker"
    assert "%i" in worker["Service"]["ExecStart"], "each instance names its worker"
    assert worker["Service"]["Restart"] == "always"
    for unit in (api, worker):
        assert unit["Service"]["EnvironmentFile"] == "/etc/boundwise/boundwise.env"
        assert unit["Service"]["User"] == "boundwise"
        assert "PROMETHEUS_MULTIPROC_DIR=/run/boundwise/metrics" in unit["Service"]["Environment"]


def test_redis_conf_and_containerfile():
    conf = dict(line.split(None, 1) for line in (DEPLOY / "redis" / "redis.conf").read_text().splitlines()
                if line.strip() and not line.startswith("#") and not line.startswith("save"))
    assert conf["appendonly"] == "yes" and conf["maxmemory-policy"] == "noeviction"
    text = (DEPLOY / "Containerfile").read_text()
    assert "USER boundwise" in text
    cmd = next(line for line in text.splitlines() if line.startswith("CMD "))
    assert yaml.safe_load(cmd[4:]) == API_COMMAND


def test_the_gunicorn_config_loads_with_the_app():
    import subprocess
    import sys

    root = DEPLOY.parent
    out = subprocess.run([sys.executable, "-m", "gunicorn", "--check-config", "--config",
                          str(DEPLOY / "gunicorn.conf.py"), "service.app:create_app()"],
                         cwd=root, capture_output=True, text=True, timeout=60,
                         env={**__import__("os").environ, "PYTHONPATH": str(root)})
    assert out.returncode == 0, out.stderr[-2000:]


def test_gunicorn_settings_thread_workers_and_drop_dead_workers_metrics():
    import runpy

    settings = runpy.run_path(str(DEPLOY / "gunicorn.conf.py"))  # gunicorn reads the file the same way
    assert settings["worker_class"] == "gthread" and settings["threads"] >= 2
    assert callable(settings["child_exit"]) and callable(settings["on_starting"])


def test_the_commands_the_deploy_files_run_exist():
    from service.cli import build_parser

    parser = build_parser()
    for argv in (WORKER_COMMAND[1:], ["worker", "--name", "host-1"]):
        args = parser.parse_args(argv)
        assert args.command == "worker" and callable(args.func)
    import fakeredis

    from service.app import create_app
    from service.config import load

    app = create_app(load({"BOUNDWISE_AUTH": "on"}), redis=fakeredis.FakeRedis())
    rules = {r.rule for r in app.url_map.iter_rules()}
    assert {"/healthz", "/readyz", "/metrics"} <= rules
    client = app.test_client()
    # the probes need no key: a load balancer or kubelet has none
    assert client.get("/healthz").status_code == 200
    assert client.get("/readyz").status_code in (200, 503)
