"""Atomic writes: the target is replaced whole, no temporary file is left, permissions follow the umask,
and a failed write leaves the old file untouched (property checks; no outside reference needed)."""

import os

import pytest

from invdesign._atomic import atomic_write_bytes, atomic_write_text


def test_replaces_whole_and_leaves_no_temporary(tmp_path):
    p = tmp_path / "sub" / "a.txt"
    atomic_write_text(p, "first")
    atomic_write_text(p, "second")
    assert p.read_text() == "second"
    assert sorted(x.name for x in p.parent.iterdir()) == ["a.txt"]


def test_permissions_are_those_of_a_plain_open(tmp_path):
    mask = os.umask(0)
    os.umask(mask)
    p = atomic_write_bytes(tmp_path / "b.bin", b"\x00\x01")
    assert (p.stat().st_mode & 0o777) == (0o666 & ~mask)


def test_failed_write_keeps_the_old_file(tmp_path):
    p = tmp_path / "c.txt"
    atomic_write_text(p, "kept")
    with pytest.raises(TypeError):
        atomic_write_bytes(p, "not bytes")  # fails inside the write, after the temporary exists
    assert p.read_text() == "kept"
    assert sorted(x.name for x in tmp_path.iterdir()) == ["c.txt"]
