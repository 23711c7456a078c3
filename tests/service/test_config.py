"""Settings: one table, documented defaults, and a clear refusal naming any bad variable."""

from __future__ import annotations

import dataclasses

import pytest

import service.config as config_module
from service.config import LIMIT_SETTINGS, SETTINGS, Config, ConfigError, load


def test_the_defaults_of_the_table_are_the_defaults_of_the_config():
    loaded = load({})
    plain = Config()
    for f in dataclasses.fields(Config):
        if f.name != "limits":
            assert getattr(loaded, f.name) == getattr(plain, f.name), f.name
    # common practice: documented defaults (deploy guide and this module's table)
    assert loaded.limits.max_body_bytes == 2 * 1024 * 1024
    assert loaded.limits.caps.max_time_s == 300.0 and loaded.default_time_s == 30.0
    assert loaded.lost_after_s <= 10.0


def test_every_variable_is_listed_in_the_module_documentation():
    doc = config_module.__doc__
    for setting in (*SETTINGS, *LIMIT_SETTINGS):
        assert setting.name in doc, setting.name


@pytest.mark.parametrize(("name", "value"), [
    ("REDIS_URL", "http://127.0.0.1:6379"),
    ("BOUNDWISE_AUTH", "maybe"),
    ("BOUNDWISE_HEARTBEAT_S", "-1"),
    ("BOUNDWISE_DEFAULT_TIME_S", "soon"),
    ("BOUNDWISE_PROGRESS_S", "inf"),
    ("BOUNDWISE_WEB_WORKERS", "2.5"),
    ("BOUNDWISE_LOG_FORMAT", "xml"),
    ("BOUNDWISE_LOG_LEVEL", "LOUD"),
    ("BOUNDWISE_WORKER_METRICS_PORT", "70000"),
    ("BOUNDWISE_MAX_TIME_S", "abc"),
    ("BOUNDWISE_MAX_BODY_BYTES", "-5"),
    ("BOUNDWISE_TENANT_CAPS", "[1]"),
])
def test_a_bad_value_is_refused_naming_its_variable(name, value):
    with pytest.raises(ConfigError) as info:
        load({name: value})
    assert info.value.name == name and name in str(info.value)


def test_a_live_job_cannot_be_called_lost_between_two_heartbeats():
    with pytest.raises(ConfigError) as info:
        load({"BOUNDWISE_HEARTBEAT_S": "2", "BOUNDWISE_LOST_AFTER_S": "3"})
    assert info.value.name == "BOUNDWISE_LOST_AFTER_S"


def test_values_are_read_and_handed_to_the_jobs():
    cfg = load({"BOUNDWISE_HEARTBEAT_S": "0.5", "BOUNDWISE_LOST_AFTER_S": "4", "BOUNDWISE_MAX_TIME_S": "90",
                "BOUNDWISE_AUTH": "off", "BOUNDWISE_WORKER_METRICS_PORT": "9102"})
    assert cfg.auth_required is False and cfg.limits.caps.max_time_s == 90.0
    assert cfg.worker_metrics_port == 9102
    assert cfg.worker_settings()["heartbeat_s"] == 0.5 and cfg.worker_settings()["lost_after_s"] == 4.0
