"""The install profiles and their locks (requirements/*.txt, written by `make lock`), read and compared.

A profile is a set of extras of pyproject.toml and the lock that pins all of it with hashes.
``python -m tests.deploy.locks environment LOCK FREEZE`` compares an environment (the output of
``pip list --format=freeze``) with a lock: deploy/check-container.sh runs it on the image.
"""

from __future__ import annotations

import re
import sys
import tomllib
from dataclasses import dataclass
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
PYPROJECT = REPO / "pyproject.toml"
PROJECT = "tailgauge"

# profile -> (lock file, extras installed); the base profile is the install without extras.
PROFILES = {
    "base": ("requirements/base.txt", ()),
    "serve": ("requirements/serve.txt", ("server",)),
    "test": ("requirements/test.txt", ("test",)),
    "container-checks": ("requirements/container-checks.txt", ("container-checks",)),
}
# Locks that also hold the build backend, for installs without build isolation.
WITH_BUILD_BACKEND = ("base", "serve", "test")
# Installed in an environment beside what a lock pins: the installer and the project itself.
NOT_LOCKED = {"pip", PROJECT}

_PIN = re.compile(r"^(?P<name>[A-Za-z0-9][A-Za-z0-9._-]*)(?:\[[^\]]*\])?==(?P<version>[^\s;\\]+)")
_MARKER = re.compile(r";\s*(?P<marker>[^\\]+?)\s*\\?\s*$")


def normalize(name: str) -> str:
    """A distribution name as PEP 503 compares them."""
    return re.sub(r"[-_.]+", "-", name).lower()


@dataclass(frozen=True)
class Pin:
    version: str
    marker: str | None
    hashes: int


def read_lock(path: Path) -> dict[str, Pin]:
    """Every pin of a requirements file with hashes: name -> version, environment marker, hash count.

    A universal lock may pin one name twice under exclusive markers (one version for Python
    3.11, another for 3.12 and later): the pin whose marker holds here is kept."""
    pins: dict[str, Pin] = {}
    current = None
    for line in path.read_text().splitlines():
        match = _PIN.match(line)
        if match:
            marker = _MARKER.search(line)
            pin = Pin(match["version"], marker["marker"] if marker else None, 0)
            name = normalize(match["name"])
            current = name if name not in pins or _applies(pin.marker) else None
            if current:
                pins[current] = pin
        elif current and line.strip().startswith("--hash=sha256:"):
            pin = pins[current]
            pins[current] = Pin(pin.version, pin.marker, pin.hashes + 1)
    return pins


def _pinned(requirement: str) -> tuple[str, str, tuple[str, ...]]:
    """(name, exact version or "", extras) of a requirement string of pyproject.toml."""
    match = re.match(r"^\s*([A-Za-z0-9][A-Za-z0-9._-]*)\s*(?:\[([^\]]*)\])?\s*(?:==\s*([^\s;,]+))?", requirement)
    assert match, requirement
    extras = tuple(extra.strip() for extra in (match[2] or "").split(",") if extra.strip())
    return normalize(match[1]), match[3] or "", extras


def project() -> dict:
    return tomllib.loads(PYPROJECT.read_text())


def requirements(extras: tuple[str, ...], *, base: bool = True) -> dict[str, str]:
    """name -> pinned version of the base dependencies (unless ``base`` is false) and the extras,
    following the project's references to its own extras (``tailgauge[server,dask]``)."""
    metadata = project()["project"]
    groups = metadata.get("optional-dependencies", {})
    found: dict[str, str] = {}
    pending = [*(metadata["dependencies"] if base else ()), *(r for extra in extras for r in groups[extra])]
    seen: set[str] = set()
    while pending:
        name, version, own_extras = _pinned(pending.pop())
        if name == PROJECT:
            for extra in own_extras:
                if extra not in seen:
                    seen.add(extra)
                    pending.extend(groups[extra])
            continue
        found[name] = version
    return found


def build_requirements() -> dict[str, str]:
    return {name: version for name, version, _ in map(_pinned, project()["build-system"]["requires"])}


def lock_of(profile: str) -> dict[str, Pin]:
    return read_lock(REPO / PROFILES[profile][0])


def _applies(marker: str | None) -> bool:
    if marker is None:
        return True
    try:
        from packaging.markers import Marker
    except ImportError:  # pip vendors it
        from pip._vendor.packaging.markers import Marker
    return Marker(marker).evaluate()


def read_freeze(text: str) -> dict[str, str]:
    """name -> version from ``pip list --format=freeze`` (or ``pip freeze``) output."""
    installed = {}
    for line in text.splitlines():
        match = _PIN.match(line.strip())
        if match:
            installed[normalize(match["name"])] = match["version"]
    return installed


def environment_differences(lock: dict[str, Pin], installed: dict[str, str]) -> list[str]:
    """What an environment holds beyond its lock, lacks of it, or holds at another version."""
    differences = []
    for name, version in sorted(installed.items()):
        if name in NOT_LOCKED:
            continue
        if name not in lock:
            differences.append(f"{name}=={version} is installed but not in the lock")
        elif lock[name].version != version:
            differences.append(f"{name}=={version} is installed, the lock pins {lock[name].version}")
    for name, pin in sorted(lock.items()):
        if name not in installed and _applies(pin.marker):
            differences.append(f"{name}=={pin.version} is locked but not installed")
    return differences


def main(argv: list[str]) -> int:
    if len(argv) != 3 or argv[0] != "environment":
        print("usage: python -m tests.deploy.locks environment LOCK FREEZE_OUTPUT", file=sys.stderr)
        return 2
    lock = read_lock(Path(argv[1]))
    differences = environment_differences(lock, read_freeze(Path(argv[2]).read_text()))
    for difference in differences:
        print(difference)
    return 1 if differences else 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
