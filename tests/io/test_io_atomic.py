"""atomic_path: the result appears whole or not at all."""

from __future__ import annotations

import os
import stat

import numpy as np
import pytest

from porecast.io.atomic import atomic_path


def test_success_replaces_and_leaves_no_temp(tmp_path):
    final = tmp_path / "result.npy"
    with atomic_path(final) as tmp:
        assert tmp.parent == tmp_path and tmp.suffix == ".npy" and tmp.exists()
        assert not final.exists()
        np.save(tmp, np.arange(3))  # keeps the name: the suffix is already .npy
    np.testing.assert_array_equal(np.load(final), [0, 1, 2])
    assert os.listdir(tmp_path) == ["result.npy"]


def test_failure_keeps_the_old_file_and_removes_the_temp(tmp_path):
    final = tmp_path / "summary.json"
    final.write_text("old")
    with pytest.raises(ZeroDivisionError):
        with atomic_path(final) as tmp:
            tmp.write_text("half written")
            _ = 1 / 0
    assert final.read_text() == "old"
    assert os.listdir(tmp_path) == ["summary.json"]


def test_keyboard_interrupt_also_cleans_up(tmp_path):
    with pytest.raises(KeyboardInterrupt):
        with atomic_path(tmp_path / "x.sgy", fsync=False) as tmp:
            tmp.write_bytes(b"123")
            raise KeyboardInterrupt
    assert os.listdir(tmp_path) == []


def test_missing_directory_refused(tmp_path):
    with pytest.raises(FileNotFoundError, match="does not exist"):
        with atomic_path(tmp_path / "nope" / "x.txt"):
            pass


def test_permissions_follow_the_umask(tmp_path):
    old = os.umask(0o022)
    try:
        with atomic_path(tmp_path / "p.txt") as tmp:
            tmp.write_text("x")
    finally:
        os.umask(old)
    assert stat.S_IMODE(os.stat(tmp_path / "p.txt").st_mode) == 0o644
