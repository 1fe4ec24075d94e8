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


def test_a_leftover_temporary_of_the_same_name_is_skipped_not_overwritten(tmp_path,
                                                                         monkeypatch):
    import itertools

    import pipeline.fileio as fileio

    monkeypatch.setattr(fileio, "_SERIAL", itertools.count(5))
    leftover = tmp_path / f".x.txt.{os.getpid()}.5.tmp"
    leftover.write_text("someone else's")
    write_text(tmp_path / "x.txt", "new\n")
    assert (tmp_path / "x.txt").read_text() == "new\n"
    assert leftover.read_text() == "someone else's"


def test_json_text_reads_back_as_the_standard_encoder_writes(tmp_path):
    # reference: the standard library's json module, both ways
    import json

    from pipeline.fileio import json_text

    obj = {"nodes": ["A", "B"], "edges": [{"source": "A", "via": [], "p": 1e-300}],
           "empty": {}, "n": 3, 1: "int key", "nested": {"m": [[1.5, None], [2, True]]}}
    text = json_text(obj)
    assert json.loads(text) == json.loads(json.dumps(obj))
    assert '    {"source": "A", "via": [], "p": 1e-300}' in text.splitlines()
