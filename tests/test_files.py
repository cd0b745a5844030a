"""The one file writer (crewcut.files): all at once, all or none, the usual file mode.

Sources: POSIX.1-2017 rename() ("If the link named by the new argument exists, it
shall be removed and old renamed to new ... a link named new shall remain visible
to other threads throughout the renaming operation"), so readers see the old file
or the new one, never half of one; POSIX.1-2017 open() and umask() (a new file's
permission bits are the requested mode, 0666 for ordinary files, with the umask's
bits cleared); fsync() ("all data for the open file descriptor ... transferred to
the storage device"). The no-partial-output rule is this project's.
"""
from __future__ import annotations

import os
import stat

import pytest

from crewcut.files import atomic_write, atomic_write_many, file_mode


@pytest.fixture
def umask_027():
    old = os.umask(0o027)
    try:
        yield 0o027
    finally:
        os.umask(old)


def test_several_files_all_or_none_when_a_folder_cannot_be_made(tmp_path):
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("x")
    with pytest.raises(OSError):
        atomic_write_many([(tmp_path / "a.txt", "first"), (blocker / "b.txt", "second")])
    assert sorted(p.name for p in tmp_path.iterdir()) == ["not-a-folder"]
    written = atomic_write_many([(tmp_path / "a.txt", "first"), (tmp_path / "sub" / "b.txt", b"second")])
    assert [p.read_bytes() for p in written] == [b"first", b"second"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt", "not-a-folder", "sub"]


def test_a_failure_part_way_leaves_nothing_and_old_files_untouched(tmp_path, monkeypatch):
    old = tmp_path / "a.txt"
    old.write_bytes(b"yesterday")
    real_fsync, calls = os.fsync, []

    def failing_fsync(fd):  # the disk fills up while the second file is synced
        calls.append(fd)
        if len(calls) == 2:
            raise OSError(28, "No space left on device")
        real_fsync(fd)

    monkeypatch.setattr(os, "fsync", failing_fsync)
    with pytest.raises(OSError, match="No space left"):
        atomic_write_many([(old, "today"), (tmp_path / "b.txt", "second")])
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt"]  # no b.txt, no .part file
    assert old.read_bytes() == b"yesterday"


def test_data_is_synced_before_the_rename(tmp_path, monkeypatch):
    order = []
    real_fsync, real_replace = os.fsync, os.replace
    monkeypatch.setattr(os, "fsync", lambda fd: (order.append("fsync"), real_fsync(fd))[1])
    monkeypatch.setattr(os, "replace", lambda a, b: (order.append("replace"), real_replace(a, b))[1])
    atomic_write(tmp_path / "x.txt", "text")
    assert order[:2] == ["fsync", "replace"]
    assert (tmp_path / "x.txt").read_text() == "text"


def test_mode_is_the_umasks(tmp_path, umask_027):
    path = atomic_write(tmp_path / "m.txt", "x")
    assert stat.S_IMODE(path.stat().st_mode) == 0o666 & ~umask_027 == file_mode() == 0o640
    # the same mode open() gives a new file (POSIX open(): mode 0666 less the umask)
    with open(tmp_path / "plain.txt", "w") as fh:
        fh.write("x")
    assert stat.S_IMODE((tmp_path / "plain.txt").stat().st_mode) == stat.S_IMODE(path.stat().st_mode)


def test_demo_town_writer_uses_the_same_mode(tmp_path, umask_027):
    from crewcut.demo.towngen import write_town_and_config

    net, cfg = write_town_and_config(tmp_path, n_segments=200, seed=1)
    assert {stat.S_IMODE(p.stat().st_mode) for p in (net, cfg)} == {0o640}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["tallowmere.geojson", "tallowmere.toml"]


def test_text_is_utf8(tmp_path):
    assert atomic_write(tmp_path / "u.txt", "Höhe ≥ 2 m").read_bytes() == "Höhe ≥ 2 m".encode("utf-8")
