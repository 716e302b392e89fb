"""A small tmpfs for tests of a full filesystem, and filling it.

The tmpfs is mounted in a private mount namespace (``unshare --user --map-root-user --mount``:
root, or any user where user namespaces are enabled), so nothing outside the test sees it.
"""

from __future__ import annotations

import os


def on_tmpfs(directory, size: str, command: list[str], *, before: str = "") -> list[str]:
    """``command`` run with a fresh tmpfs of ``size`` mounted on ``directory`` (``before``: shell
    run first, with the directory as ``$1``)."""
    shell = f'mount -t tmpfs -o size={size} tailgauge-test "$1" && {before}shift && exec "$@"'
    return ["unshare", "--user", "--map-root-user", "--mount", "sh", "-c", shell, "sh", str(directory), *command]


def fill_until_full(path) -> None:
    """Append zeros to ``path`` until its filesystem refuses more."""
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_APPEND)
    try:
        while True:
            os.write(fd, bytes(4096))
    except OSError:
        pass
    finally:
        os.close(fd)
