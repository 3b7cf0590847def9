"""The temporary Prefect server downcore starts (``pipelines/flows/localserver.py``): the
settings it is given. Source of the checks: our own design (block registration is skipped
because no flow or task of downcore uses blocks; a user's own setting always wins)."""

from __future__ import annotations

import pipelines.flows.localserver as localserver
from pipelines.flows.localserver import SERVER_ENV_DEFAULTS, LocalServer


def _spawned_env(monkeypatch, tmp_path) -> dict:
    seen: dict = {}

    def fake_spawn(command, env, stdout, stderr):
        seen.update(env)
        return None

    monkeypatch.setenv("PREFECT_HOME", str(tmp_path))
    monkeypatch.setattr(localserver, "spawn_tied_to_parent", fake_spawn)
    server = LocalServer()
    server._spawn(str(tmp_path))
    server._log.close()
    return seen


def test_server_skips_block_registration(monkeypatch, tmp_path):
    for name in SERVER_ENV_DEFAULTS:
        monkeypatch.delenv(name, raising=False)
    env = _spawned_env(monkeypatch, tmp_path)
    assert env["PREFECT_SERVER_REGISTER_BLOCKS_ON_START"] == "false"
    assert env["PREFECT_SERVER_MEMOIZE_BLOCK_AUTO_REGISTRATION"] == "false"
    assert env["PREFECT__SERVER_EPHEMERAL"] == "1"


def test_user_setting_wins(monkeypatch, tmp_path):
    monkeypatch.setenv("PREFECT_SERVER_REGISTER_BLOCKS_ON_START", "true")
    env = _spawned_env(monkeypatch, tmp_path)
    assert env["PREFECT_SERVER_REGISTER_BLOCKS_ON_START"] == "true"


def test_server_settings_are_read_by_prefect(monkeypatch):
    """The names are ones Prefect reads (a misspelt name would be silently ignored)."""
    from prefect.settings import Settings

    for name, value in SERVER_ENV_DEFAULTS.items():
        monkeypatch.setenv(name, value)
    settings = Settings()
    assert settings.server.register_blocks_on_start is False
    assert settings.server.memoize_block_auto_registration is False
