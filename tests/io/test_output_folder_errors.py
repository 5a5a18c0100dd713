"""The refusal of an output folder whose parent cannot be written (strikeline.io.files.output_folder):
one message, whichever step met the file system's error - recovering leftovers and checking the
folder, or making the part folder - and nothing left behind.

# Source: the reason text is the C library's for the errno, as Python's os.strerror gives it.
"""
from __future__ import annotations

import errno
import os

import pytest

from strikeline.errors import OutputError
from strikeline.io import files
from strikeline.io.files import output_folder


def _expected(out, err: int, option: str = "--out") -> str:
    # Source: os.strerror(err) (Python standard library) is the reason the message must carry.
    return f"cannot write beside '{out}': {os.strerror(err)}; choose a writable folder for {option}"


def _left(tmp_path) -> list[str]:
    """What the attempt left in the parent folder, the lock file apart (it stays, by design)."""
    return sorted(p.name for p in tmp_path.iterdir() if not p.name.endswith(".strikeline-lock"))


def test_an_error_while_recovering_names_the_folder_and_the_reason(tmp_path, monkeypatch):
    out = tmp_path / "res"

    def refuse(path, log):
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), str(path))

    monkeypatch.setattr(files, "_recover", refuse)
    with pytest.raises(OutputError) as exc:
        with output_folder(out):
            pytest.fail("the block must not run")
    assert str(exc.value) == _expected(out, errno.EACCES)
    assert _left(tmp_path) == []


def test_an_error_making_the_part_folder_gives_the_same_message(tmp_path, monkeypatch):
    out = tmp_path / "res"
    sibling = files._sibling

    def nowhere(path, kind):  # a part folder inside a folder that does not exist: mkdir fails
        return tmp_path / "missing" / "part" if kind == "part" else sibling(path, kind)

    monkeypatch.setattr(files, "_sibling", nowhere)
    with pytest.raises(OutputError) as exc:
        with output_folder(out, option="the 'Output folder'"):
            pytest.fail("the block must not run")
    assert str(exc.value) == _expected(out, errno.ENOENT, "the 'Output folder'")
    assert _left(tmp_path) == []

