"""A folder nobody can write to, also when the tests run as root (who ignores permission
bits): a read-only tmpfs mount when the process may mount, else the immutable attribute,
else (an ordinary user) permission bits."""

from __future__ import annotations

import contextlib
import os
import pathlib
import subprocess

import pytest


def _try(*command: str) -> bool:
    return subprocess.run(command, capture_output=True).returncode == 0


@contextlib.contextmanager
def read_only_folder(path: pathlib.Path):
    """Yield ``path`` (created) made read-only; restore it afterwards."""
    path.mkdir(parents=True, exist_ok=True)
    if os.geteuid() != 0:
        path.chmod(0o555)
        try:
            yield path
        finally:
            path.chmod(0o755)
        return
    if _try("mount", "-t", "tmpfs", "-o", "ro,size=64k", "tmpfs", str(path)):
        try:
            yield path
        finally:
            _try("umount", str(path))
        return
    if _try("chattr", "+i", str(path)):
        try:
            yield path
        finally:
            _try("chattr", "-i", str(path))
        return
    pytest.skip("running as root without mount or chattr: cannot make a read-only folder")
