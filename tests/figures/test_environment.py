"""matplotlib's configuration directory: private to this user, under the temporary directory."""

from __future__ import annotations

import os
import stat

from tailgauge.figures import environment


def test_the_configuration_directory_in_use_is_private_and_writable():
    directory = os.environ["MPLCONFIGDIR"]
    found = os.lstat(directory)
    assert stat.S_ISDIR(found.st_mode) and found.st_uid == os.getuid()
    assert os.access(directory, os.W_OK)


def test_a_private_directory_is_made_or_reused_under_the_temporary_directory(tmp_path, monkeypatch):
    monkeypatch.setattr(environment.tempfile, "gettempdir", lambda: str(tmp_path))
    made = environment._private_directory()
    assert made == str(tmp_path / f"tailgauge-matplotlib-{os.getuid()}")
    assert stat.S_IMODE(os.lstat(made).st_mode) == 0o700
    assert environment._private_directory() == made  # the same one next time


def test_a_planted_or_open_directory_is_not_used(tmp_path, monkeypatch):
    monkeypatch.setattr(environment.tempfile, "gettempdir", lambda: str(tmp_path))
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (tmp_path / f"tailgauge-matplotlib-{os.getuid()}").symlink_to(elsewhere)
    chosen = environment._private_directory()
    assert chosen != str(elsewhere) and os.path.basename(chosen).startswith("tailgauge-matplotlib-")
    assert not os.path.islink(chosen) and stat.S_IMODE(os.lstat(chosen).st_mode) == 0o700
    os.rmdir(chosen)
    (tmp_path / f"tailgauge-matplotlib-{os.getuid()}").unlink()
    opened = tmp_path / f"tailgauge-matplotlib-{os.getuid()}"
    opened.mkdir(mode=0o777)
    os.chmod(opened, 0o777)
    chosen = environment._private_directory()
    assert chosen != str(opened)
    os.rmdir(chosen)
