"""Atomic output files (CONTRACT.md: an interrupted run leaves the previous result whole)."""

import os
import stat

import pytest

from pipeline.fileio import atomic_write, write_json, write_text


def test_a_failed_write_leaves_the_old_file_and_no_temporary(tmp_path):
    path = write_text(tmp_path / "result.json", "old\n")

    def broken(fh):
        fh.write("half of the new ")
        raise RuntimeError("interrupted")

    with pytest.raises(RuntimeError):
        atomic_write(path, broken)
    assert path.read_text() == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["result.json"]


def test_written_files_are_ordinary_files(tmp_path):
    path = write_json(tmp_path / "sub" / "x.json", {"a": 1})
    assert path.read_text() == '{\n  "a": 1\n}\n'
    mode = stat.S_IMODE(os.stat(path).st_mode)
    umask = os.umask(0)
    os.umask(umask)
    assert mode == 0o666 & ~umask  # as open() would make it, not mkstemp's 0600


def test_json_refuses_nan(tmp_path):
    with pytest.raises(ValueError):
        write_json(tmp_path / "x.json", {"p": float("nan")})  # JSON has no NaN
    assert not (tmp_path / "x.json").exists()
