"""Tests of workbench.fileio: atomic_output and check_writable."""

from __future__ import annotations

import os
import stat

import pytest

from workbench.errors import InputError, OutputExistsError
from workbench.fileio import atomic_output, check_writable


def _leftovers(folder):
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


def test_success_renames_into_place(tmp_path):
    target = tmp_path / "out.txt"
    with atomic_output(target) as tmp:
        assert tmp.parent == tmp_path and tmp != target
        assert not target.exists()  # nothing under the final name while writing
        tmp.write_text("hello")
    assert target.read_text() == "hello"
    assert _leftovers(tmp_path) == []


def test_exception_removes_temporary_and_keeps_old_file(tmp_path):
    target = tmp_path / "out.txt"
    target.write_text("old")
    with pytest.raises(RuntimeError, match="boom"):
        with atomic_output(target, force=True) as tmp:
            tmp.write_text("half written")
            raise RuntimeError("boom")
    assert target.read_text() == "old"
    assert _leftovers(tmp_path) == []


def test_existing_file_refused_without_force(tmp_path):
    target = tmp_path / "out.txt"
    target.write_text("old")
    with pytest.raises(OutputExistsError, match="exists already; pass --force"):
        with atomic_output(target):
            pass
    assert target.read_text() == "old"
    with atomic_output(target, force=True) as tmp:
        tmp.write_text("new")
    assert target.read_text() == "new"


def test_file_created_meanwhile_is_not_overwritten(tmp_path):
    target = tmp_path / "out.txt"
    with pytest.raises(OutputExistsError, match="created by someone else"):
        with atomic_output(target) as tmp:
            tmp.write_text("mine")
            target.write_text("theirs")
    assert target.read_text() == "theirs"
    assert _leftovers(tmp_path) == []


def test_missing_folder_and_folder_target(tmp_path):
    with pytest.raises(InputError, match="does not exist; create it first"):
        check_writable(tmp_path / "nope" / "out.txt")
    with pytest.raises(InputError, match="is a folder"):
        check_writable(tmp_path)


def test_permissions_follow_the_umask(tmp_path):
    # POSIX: a new file gets 0666 & ~umask (common practice, no source); mkstemp would give 0600
    old = os.umask(0o022)
    try:
        with atomic_output(tmp_path / "a.txt") as tmp:
            tmp.write_text("x")
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "a.txt").stat().st_mode) == 0o644
