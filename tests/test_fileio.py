"""Atomic writes give outputs the permissions of a normal file."""

from __future__ import annotations

import os
import stat

import pytest

from tomo.core.fileio import atomic_open, atomic_path, current_umask


@pytest.fixture
def umask():
    """Set a umask for one test and restore the old one after it."""
    old = os.umask(0o022)
    os.umask(old)
    yield lambda mask: os.umask(mask)
    os.umask(old)


@pytest.mark.parametrize("mask, expected", [(0o022, 0o644), (0o027, 0o640), (0o002, 0o664)])
def test_new_output_mode_follows_the_umask(tmp_path, umask, mask, expected):
    # POSIX open(2): a new file gets mode 0666 & ~umask
    umask(mask)
    assert current_umask() == mask
    with atomic_open(tmp_path / "a.txt") as f:
        f.write("x")
    with atomic_path(tmp_path / "b.bin") as tmp:
        tmp.write_bytes(b"x")
    for name in ("a.txt", "b.bin"):
        assert stat.S_IMODE((tmp_path / name).stat().st_mode) == expected


def test_rewritten_output_keeps_its_mode(tmp_path, umask):
    # writing over a file in place (open with "w") keeps its permissions; so does the rename
    umask(0o022)
    path = tmp_path / "run.txt"
    path.write_text("old")
    os.chmod(path, 0o600)
    with atomic_open(path) as f:
        f.write("new")
    assert path.read_text() == "new" and stat.S_IMODE(path.stat().st_mode) == 0o600
