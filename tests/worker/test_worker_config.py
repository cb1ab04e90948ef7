"""Worker configuration: Celery settings from the settings object, child-process settings."""

from __future__ import annotations

import pytest
from pydantic import ValidationError

from porecast.services import run_execution as ex
from porecast.settings import Settings, load_settings
from porecast.worker.app import celery_config, result_backend
from porecast.worker.config import JobSettings, load_job_settings
from porecast.worker.local import settings_env, worker_argv


def _settings(tmp_path, **kw) -> Settings:
    return Settings(environment="test", data_dir=tmp_path / "data", frontend_dir=None, **kw)


def test_one_machine_defaults_need_no_server(tmp_path):
    conf = celery_config(_settings(tmp_path), JobSettings())
    assert conf["broker_url"] == "filesystem://"
    opts = conf["broker_transport_options"]
    assert opts["data_folder_in"] == opts["data_folder_out"]
    assert opts["processed_folder"].startswith(str((tmp_path / "data").resolve()))
    assert conf["result_backend"].startswith("db+sqlite:///")
    assert conf["task_acks_late"] and conf["task_reject_on_worker_lost"]
    assert conf["worker_prefetch_multiplier"] == 1
    assert conf["include"] == ["porecast.worker.tasks"]


def test_redis_visibility_timeout_exceeds_the_task_time_limit(tmp_path):
    jobs = JobSettings(task_time_limit_s=600, broker_visibility_timeout_s=900)
    s = _settings(tmp_path, broker_url="redis://127.0.0.1:6379/3")
    conf = celery_config(s, jobs)
    assert conf["broker_transport_options"]["visibility_timeout"] == 900
    assert conf["task_time_limit"] == 600 < conf["broker_transport_options"]["visibility_timeout"]
    assert result_backend(s) == "redis://127.0.0.1:6379/3"
    with pytest.raises(ValidationError, match="visibility_timeout"):
        JobSettings(task_time_limit_s=600, broker_visibility_timeout_s=600)


def test_a_child_process_rebuilds_the_same_settings(tmp_path, monkeypatch):
    s = _settings(tmp_path, database_url="postgresql+psycopg://u@h/db",
                  broker_url="redis://h:6379/0", secret_key="x" * 40, max_upload_mb=7.5)
    jobs = JobSettings(max_deliveries=5, worker_imports=["a.b"], tile_traces=123)
    for name, value in settings_env(s, jobs).items():
        monkeypatch.setenv(name, value)
    again = load_settings()
    # an unset (None) field keeps the child's default; only the front end folder, unused there
    skip = {"frontend_dir"}
    assert again.model_dump(exclude=skip) == s.model_dump(exclude=skip) | {
        "data_dir": s.data_dir.resolve()}
    assert again.secret_key.get_secret_value() == "x" * 40
    assert load_job_settings() == jobs


def test_worker_argv_names_the_queue_and_pool():
    argv = worker_argv("w1@%h", concurrency=3, pool="prefork", loglevel="INFO")
    assert argv[:3] == ["worker", "-n", "w1@%h"] and "-c" in argv and "3" in argv
    assert "-c" not in worker_argv("w@h", concurrency=3, pool="solo", loglevel="INFO")


@pytest.mark.parametrize("n, size", [(1, 1), (48, 10), (50, 50), (7, 100)])
def test_tiles_cover_every_trace_once(n, size):
    tiles = ex.plan_tiles(n, size)
    covered = [i for a, b in tiles for i in range(a, b)]
    assert covered == list(range(n)) and all(b - a <= size for a, b in tiles)
