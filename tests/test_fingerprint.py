"""The digest cache of the fingerprint (pipeline.stats.fingerprint): a stored digest stands
in for reading a file only while its stat record is unchanged and not racy.

Reference digests are hashlib.sha256 over the whole file at once; stat fields come from
os.stat. The files are made once and aged past the racy window (2 s) by waiting, since a
status-change time cannot be set back.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import sqlite3
import time

import pytest

import pipeline.stats.fingerprint as fp
from pipeline.independence.store import TestStore
from pipeline.provenance import file_record
from pipeline.simulation import simulate
from pipeline.workflow import learn

NAMES = ("kept", "size", "mtime", "inode", "content", "racy", "future", "field", "cli",
         "bad")


@pytest.fixture(scope="module")
def aged(tmp_path_factory):
    """Data and regimes files last changed more than the racy window ago, one data file
    per test that changes it, and a simulated data set for the workflow."""
    folder = tmp_path_factory.mktemp("aged")
    sim = simulate(nodes=6, degree=2.0, regimes=3, samples=300, kind="knockdown", seed=4)
    sim.save(folder)
    regimes = (folder / "regimes.csv").read_text()
    lines = (folder / "data.csv").read_text().splitlines(keepends=True)
    for i, name in enumerate(NAMES):  # distinct bytes: one row left out per copy
        (folder / name).mkdir()
        (folder / name / "data.csv").write_text("".join(lines[:1] + lines[2 + i:]))
        (folder / name / "regimes.csv").write_text(regimes)
    time.sleep(fp.RACY_NS / 1e9 + 0.3)  # older than the racy window
    return folder


@pytest.fixture(autouse=True)
def fresh_process(monkeypatch):
    """Nothing hashed yet in this process (the in-memory digests start empty)."""
    monkeypatch.setattr(fp, "FILE_HASHES", {})
    monkeypatch.setattr(fp, "_STARTED", {})
    monkeypatch.setattr(fp, "_PENDING", {})


def _no_reading(monkeypatch):
    """From here on, reading a file's bytes to hash them fails the test."""
    def boom(*args, **kwargs):
        raise AssertionError("the bytes of an input were read")

    monkeypatch.setattr(fp, "file_digest", boom)


def _sha256(path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()  # hashlib: the reference


def _paths(aged, name):
    return [aged / name / "data.csv"], aged / name / "regimes.csv"


def _record(path, **change) -> tuple:
    """A trustworthy record of `path` as it is now (hashed now, over 2 s after its last
    change), with the fields in `change` replaced."""
    st = os.stat(path)
    row = {"path": str(path.resolve()), "dev": st.st_dev, "ino": st.st_ino,
           "size": st.st_size, "mtime_ns": st.st_mtime_ns, "ctime_ns": st.st_ctime_ns,
           "sha256": _sha256(path),
           "hashed_ns": time.time_ns()}
    row.update(change)
    return tuple(row.values())


def _cold(aged, name, out):
    """Fingerprint `name`'s files, hashing them, and keep their records in `out`'s store."""
    data, regimes = _paths(aged, name)
    before = time.time_ns()
    fingerprint = fp.fingerprint_inputs(data, regimes, out=out)
    rows = fp.digest_records([*data, regimes])
    with TestStore(out / "tests.sqlite") as store:
        assert store.put_digests(rows)
    return fingerprint, rows, before


def _forget(monkeypatch):
    monkeypatch.setattr(fp, "FILE_HASHES", {})
    monkeypatch.setattr(fp, "_STARTED", {})


def test_a_record_stands_in_for_an_unchanged_old_file(tmp_path, aged, monkeypatch):
    data, regimes = _paths(aged, "kept")
    out = tmp_path / "out"
    fingerprint, rows, before = _cold(aged, "kept", out)
    # each record: the stat fields of os.stat, the SHA-256 of hashlib, the start of hashing
    for row, path in zip(rows, [*data, regimes], strict=True):
        st = os.stat(path)
        assert row[:6] == (str(path.resolve()), st.st_dev, st.st_ino, st.st_size,
                           st.st_mtime_ns, st.st_ctime_ns)
        assert row[6] == _sha256(path)
        assert before <= row[7] <= time.time_ns()
    with TestStore(out / "tests.sqlite") as store:
        assert store.digests() == sorted(rows)

    # a new process: the bytes are not read, and everything is as when they were
    _forget(monkeypatch)
    _no_reading(monkeypatch)
    assert fp.fingerprint_inputs(data, regimes, out=out) == fingerprint
    assert file_record(data[0], "data")["sha256"] == _sha256(data[0])
    assert fp.digest_records([*data, regimes]) == []  # nothing new to keep

    # the same through the background thread
    _forget(monkeypatch)
    fp.hash_in_background([*data, regimes], out=out)
    assert fp.fingerprint_inputs(data, regimes) == fingerprint
    assert not fp._PENDING


def _by_hand(data, regimes) -> str:
    """The fingerprint as its definition says, with hashlib: per file role, size and
    SHA-256, then the statistics options as sorted JSON."""
    h = hashlib.sha256(b"orienteer.fingerprint/2\0")
    for role, path in [*(("data", p) for p in data), ("regimes", regimes)]:
        h.update(f"{role}\0{path.stat().st_size}\0{_sha256(path)}\0".encode())
    h.update(json.dumps({"regime_column": "regime", "ignore_columns": [],
                         "drop_missing": False, "reference": None, "test": "gaussian",
                         "methods": fp.METHODS_VERSION}, sort_keys=True).encode())
    return h.hexdigest()


def test_the_fingerprint_is_the_same_from_the_cache_or_without_one(tmp_path, aged,
                                                                   monkeypatch):
    data, regimes = _paths(aged, "kept")
    reference = _by_hand(data, regimes)
    assert fp.fingerprint_inputs(data, regimes) == reference
    assert fp.fingerprint_inputs(data, regimes, out=None) == reference
    assert fp.cached_digests(None, [fp.file_key(data[0])]) == {}
    out = tmp_path / "out"
    _cold(aged, "kept", out)
    _forget(monkeypatch)
    _no_reading(monkeypatch)
    assert fp.fingerprint_inputs(data, regimes, out=out) == reference


def _change_size(path):
    with open(path, "ab") as fh:
        fh.write(b"\n")


def _change_mtime(path):
    st = os.stat(path)
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns - 10**9))


def _change_inode(path):
    """The same bytes and times in a new file, renamed over the old one."""
    st = os.stat(path)
    twin = path.with_name("twin")
    shutil.copyfile(path, twin)
    os.utime(twin, ns=(st.st_atime_ns, st.st_mtime_ns))
    os.replace(twin, path)
    assert os.stat(path).st_ino != st.st_ino


def _change_content(path):
    """Other bytes of the same length, the modification time put back: ctime moves."""
    st = os.stat(path)
    raw = bytearray(path.read_bytes())
    i = raw.rindex(b"1")
    raw[i:i + 1] = b"2"
    path.write_bytes(bytes(raw))
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns))
    now = os.stat(path)
    assert (now.st_size, now.st_mtime_ns) == (st.st_size, st.st_mtime_ns)
    assert now.st_ctime_ns != st.st_ctime_ns


@pytest.mark.parametrize("name, change", [("size", _change_size), ("mtime", _change_mtime),
                                          ("inode", _change_inode),
                                          ("content", _change_content)])
def test_a_changed_file_is_hashed_again(tmp_path, aged, monkeypatch, name, change):
    data, regimes = _paths(aged, name)
    out = tmp_path / "out"
    before, _, _ = _cold(aged, name, out)
    change(data[0])
    _forget(monkeypatch)
    assert fp.cached_digests(out, [fp.file_key(data[0])]) == {}
    after = fp.fingerprint_inputs(data, regimes, out=out)
    # hashed as without a cache: the digest is hashlib's of the new bytes
    assert fp.FILE_HASHES[fp.file_key(data[0])] == _sha256(data[0])
    _forget(monkeypatch)
    assert after == fp.fingerprint_inputs(data, regimes)
    if name != "mtime" and name != "inode":  # other bytes: another fingerprint
        assert after != before


def test_only_a_record_equal_in_every_field_and_not_racy_is_trusted(tmp_path, aged):
    data, _ = _paths(aged, "field")
    path = data[0]
    key = fp.file_key(path)
    last = max(key.mtime_ns, key.ctime_ns)
    out = tmp_path / "out"
    cases = {
        "exact": _record(path),
        "dev": _record(path, dev=key.dev + 1),
        "ino": _record(path, ino=key.ino + 1),
        "size": _record(path, size=key.size + 1),
        "mtime": _record(path, mtime_ns=key.mtime_ns - 1),
        "ctime": _record(path, ctime_ns=key.ctime_ns + 1),
        "racy": _record(path, hashed_ns=last + fp.RACY_NS - 1),
        "at the limit": _record(path, hashed_ns=last + fp.RACY_NS),
        "hashed after now": _record(path, hashed_ns=time.time_ns() + 60 * 10**9),
        "sha256 in capitals": _record(path, sha256=_sha256(path).upper()),
    }
    trusted = {}
    for what, row in cases.items():
        with TestStore(out / "tests.sqlite") as store:
            assert store.put_digests([row])
        trusted[what] = fp.cached_digests(out, [key]) == {key: _sha256(path)}
    assert trusted == {"exact": True, "dev": False, "ino": False, "size": False,
                       "mtime": False, "ctime": False, "racy": False, "at the limit": True,
                       "hashed after now": False, "sha256 in capitals": False}
    # a device or inode number past SQLite's signed 64-bit integers is kept and matched
    big = key._replace(ino=2**64 - 5)
    with TestStore(out / "tests.sqlite") as store:
        assert store.put_digests([(big.path, *fp._stat_fields(big), _sha256(path),
                                   time.time_ns())])
    assert fp.cached_digests(out, [big]) == {big: _sha256(path)}
    assert fp.cached_digests(out, [key]) == {}


def test_a_racy_file_is_hashed_and_not_recorded(tmp_path, aged, monkeypatch):
    data, regimes = _paths(aged, "racy")
    data[0].write_bytes(data[0].read_bytes())  # changed just now
    out = tmp_path / "out"
    fingerprint = fp.fingerprint_inputs(data, regimes, out=out)
    rows = fp.digest_records([*data, regimes])
    assert [r[0] for r in rows] == [str(regimes.resolve())]  # the data file is racy
    # a racy record, had it been kept, is not used: the bytes are read again
    with TestStore(out / "tests.sqlite") as store:
        st = os.stat(data[0])
        store.put_digests([_record(data[0], hashed_ns=max(st.st_mtime_ns, st.st_ctime_ns))])
    _forget(monkeypatch)
    assert fp.cached_digests(out, [fp.file_key(data[0])]) == {}
    assert fp.fingerprint_inputs(data, regimes, out=out) == fingerprint


def _ignored(out, aged, monkeypatch, name="bad"):
    """The fingerprint with `out` hashes every file and gives the plain fingerprint."""
    data, regimes = _paths(aged, name)
    plain = fp.fingerprint_inputs(data, regimes)
    _forget(monkeypatch)
    assert fp.cached_digests(out, [fp.file_key(p) for p in [*data, regimes]]) == {}
    assert fp.fingerprint_inputs(data, regimes, out=out) == plain
    assert fp.FILE_HASHES[fp.file_key(data[0])] == _sha256(data[0])


def test_no_store_or_no_table_is_ignored(tmp_path, aged, monkeypatch):
    _ignored(tmp_path / "missing", aged, monkeypatch)
    out = tmp_path / "old"
    out.mkdir()
    sqlite3.connect(out / "tests.sqlite").execute("CREATE TABLE runs (id INTEGER)").close()
    _ignored(out, aged, monkeypatch)  # a store from before the digests table


def test_a_damaged_store_or_table_is_ignored(tmp_path, aged, monkeypatch):
    data, regimes = _paths(aged, "bad")
    out = tmp_path / "garbage"
    out.mkdir()
    (out / "tests.sqlite").write_bytes(b"not a database" * 100)
    _ignored(out, aged, monkeypatch)
    # a digests table of another shape: nothing read, and keeping records fails quietly
    out = tmp_path / "shape"
    out.mkdir()
    con = sqlite3.connect(out / "tests.sqlite")
    con.execute("CREATE TABLE digests (path TEXT PRIMARY KEY, sha TEXT)")
    con.commit()
    con.close()
    _ignored(out, aged, monkeypatch)
    with TestStore(out / "tests.sqlite") as store:
        assert store.put_digests([_record(data[0])]) is False
        assert store.digests() == []
    # malformed rows: a digest that is not hex, a time that is not a number
    out = tmp_path / "rows"
    with TestStore(out / "tests.sqlite") as store:
        store.put_digests([_record(data[0], sha256="z" * 64),
                           _record(regimes, hashed_ns="later")])
    _ignored(out, aged, monkeypatch)


def test_a_rerun_reads_no_unchanged_input_and_notices_a_changed_one(tmp_path, aged,
                                                                     monkeypatch):
    data, regimes = _paths(aged, "cli")
    out = tmp_path / "out"
    cold = learn(data, regimes, out=out, alpha=0.01)
    with TestStore(out / "tests.sqlite") as store:
        kept = {row[0]: row[6] for row in store.digests()}
    assert kept == {str(p.resolve()): _sha256(p) for p in [*data, regimes]}

    _forget(monkeypatch)
    with monkeypatch.context() as m:
        _no_reading(m)
        warm = learn(data, regimes, out=out, alpha=0.005)
    assert warm.run["from_store"] and "notice" not in warm.run
    assert warm.settings["fingerprint"] == cold.settings["fingerprint"]
    # the provenance is the same as when the bytes were hashed
    stored = json.loads((out / "result.json").read_text())["provenance"]["inputs"]
    assert stored == cold.provenance["inputs"]
    assert [i["sha256"] for i in stored] == [_sha256(p) for p in [*data, regimes]]

    # an edit that keeps size and modification time is still seen, and said
    _change_content(data[0])
    _forget(monkeypatch)
    changed = learn(data, regimes, out=out, alpha=0.005)
    assert changed.settings["fingerprint"] != cold.settings["fingerprint"]
    assert not changed.run["from_store"] and "inputs differ" in changed.run["notice"]
    assert changed.provenance["inputs"][0]["sha256"] == _sha256(data[0])
