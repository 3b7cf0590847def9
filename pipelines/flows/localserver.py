"""A temporary local Prefect server started early, so its start-up overlaps downcore's own.

Prefect's embedded local mode starts a temporary server (a uvicorn subprocess serving
``prefect.server.api.server:create_app`` on 127.0.0.1, SQLite under ``PREFECT_HOME``) the first
time a flow needs the API, and only then: a run waits ~4-8 s for it (measured, see
../shared/PREFECT.md). downcore starts the very same server process at the top of the
command, while it reads the config and hashes the inputs, and points Prefect at it; the
server stops when the run ends. Nothing changes when the user has set ``PREFECT_API_URL``
(their own server is used) or disabled the temporary server.
"""

from __future__ import annotations

import contextlib
import importlib.util
import os
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request

from pipelines.lifeline import spawn_tied_to_parent

__all__ = ["LocalServer", "SERVER_ENV_DEFAULTS"]

#: settings of the temporary server only (a user's own values win): no registration of block
#: types at start-up. downcore's flows use no blocks (tasks persist no results, no cache
#: policy), and the registration, even when memoised, imports every block type and hashes the
#: registry on each start: ~0.5 s of the server's ~3.5 s start (measured, paired A/B under
#: the benchmark lock: 3.82 -> 3.34 s median to a healthy server; CPU 3.57 -> 3.09 s).
SERVER_ENV_DEFAULTS = {"PREFECT_SERVER_REGISTER_BLOCKS_ON_START": "false",
                       "PREFECT_SERVER_MEMOIZE_BLOCK_AUTO_REGISTRATION": "false"}


def _free_port() -> int:
    with contextlib.closing(socket.socket(socket.AF_INET, socket.SOCK_STREAM)) as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


class LocalServer:
    """A temporary Prefect API server subprocess (see the module docstring)."""

    def __init__(self) -> None:
        self.port = 0
        self.process: subprocess.Popen | None = None
        self.url: str | None = None

    @classmethod
    def start_if_needed(cls) -> "LocalServer | None":
        """Start a server unless an API URL is configured or temporary servers are disabled.

        The server process is spawned first and Prefect's settings are read afterwards:
        importing Prefect takes ~1 s, which the server's own start-up (~3 s) then overlaps.
        When the settings (e.g. a Prefect profile) name an API URL after all, the server just
        spawned is stopped again.
        """
        if os.environ.get("PREFECT_API_URL") or os.environ.get(
                "PREFECT_SERVER_EPHEMERAL_ENABLED", "").strip().lower() in ("0", "false", "no", "off"):
            return None
        spec = importlib.util.find_spec("prefect")
        if spec is None or spec.origin is None:
            return None
        server = cls()
        server._spawn(os.path.dirname(os.path.dirname(spec.origin)))
        from prefect.settings import PREFECT_API_URL, PREFECT_SERVER_EPHEMERAL_ENABLED

        if PREFECT_API_URL.value() or not PREFECT_SERVER_EPHEMERAL_ENABLED.value():
            server.stop()
            return None
        return server

    def _log_path(self) -> str:
        """Where the server's own messages go (its shutdown prints harmless tracebacks when
        events are still being flushed; they belong in a file, not on the user's screen)."""
        # Prefect's own default, read without importing Prefect (the server starts first)
        folder = os.path.expanduser(os.environ.get("PREFECT_HOME") or os.path.join("~", ".prefect"))
        os.makedirs(folder, exist_ok=True)
        return os.path.join(folder, "downcore-local-server.log")

    def _spawn(self, app_dir: str) -> None:
        self.port = _free_port()
        env = {**SERVER_ENV_DEFAULTS, **os.environ, "PREFECT_UI_ENABLED": "0", "PREFECT__SERVER_EPHEMERAL": "1",
               "PREFECT__SERVER_FINAL": "1"}
        self._app_dir = app_dir
        if getattr(self, "_log", None) is None:
            self._log = open(self._log_path(), "ab")  # noqa: SIM115 - closed in stop()
        self.process = spawn_tied_to_parent(  # stopped with downcore, even after kill -9
            [sys.executable, "-m", "uvicorn", "--app-dir", app_dir, "--factory",
             "prefect.server.api.server:create_app", "--host", "127.0.0.1", "--port", str(self.port),
             "--log-level", "error", "--lifespan", "on"],
            env=env, stdout=subprocess.DEVNULL, stderr=self._log)

    def wait_ready(self, timeout_s: float | None = None) -> str:
        """Block until the server answers its health check; return the API URL."""
        if self.url:
            return self.url
        timeout_s = timeout_s or float(os.environ.get("PREFECT_SERVER_EPHEMERAL_STARTUP_TIMEOUT_SECONDS", 120))
        deadline = time.monotonic() + timeout_s
        attempts = 0
        while time.monotonic() < deadline:
            assert self.process is not None
            if self.process.poll() is not None:  # port taken meanwhile, or a crash: try again
                attempts += 1
                if attempts > 3:
                    raise RuntimeError(f"the temporary Prefect server exited with code "
                                       f"{self.process.returncode} (its messages: {self._log_path()}); "
                                       "set PREFECT_API_URL to a running Prefect server, or check PREFECT_HOME")
                self._spawn(self._app_dir)
                continue
            try:
                with urllib.request.urlopen(f"http://127.0.0.1:{self.port}/api/health", timeout=2) as reply:
                    if reply.status == 200:
                        self.url = f"http://127.0.0.1:{self.port}/api"
                        return self.url
            except (urllib.error.URLError, ConnectionError, OSError):
                pass
            time.sleep(0.1)
        self.stop()
        raise RuntimeError(f"the temporary Prefect server did not start within {timeout_s:.0f} s "
                           "(raise PREFECT_SERVER_EPHEMERAL_STARTUP_TIMEOUT_SECONDS on a busy machine)")

    def stop(self) -> None:
        """Stop the server (terminate, then kill after 10 s)."""
        if self.process is not None and self.process.poll() is None:
            self.process.terminate()
            try:
                self.process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait(timeout=10)
        self.process = None
        if getattr(self, "_log", None) is not None:
            self._log.close()
            self._log = None
