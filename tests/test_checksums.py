"""File checksums for the provenance: SHA-256 as hashlib computes it, remembered per file
identity, recomputed after any change."""

from __future__ import annotations

import hashlib
import os
import time

from evtkin.run.checksums import cache_dir, sha256_of


def _reference(path) -> str:  # type: ignore[no-untyped-def]
    return hashlib.sha256(path.read_bytes()).hexdigest()  # reference: hashlib (stdlib)


def test_digest_is_sha256_and_is_remembered(tmp_path, monkeypatch) -> None:
    monkeypatch.setenv("EVTKIN_CACHE_DIR", str(tmp_path / "cache"))
    f = tmp_path / "sample.lhe"
    f.write_bytes(b"<LesHouchesEvents>\n" * 1000)
    assert sha256_of(f, block=4096) == _reference(f)
    # the cache entry is used: make it lie, and the lie comes back
    entries = list((tmp_path / "cache").rglob("*.json"))
    assert len(entries) == 1
    entries[0].write_text(entries[0].read_text().replace(_reference(f), "0" * 64))
    assert sha256_of(f) == "0" * 64
    # any write changes the identity (size or modification time): hashed again
    time.sleep(0.01)
    with open(f, "ab") as fh:
        fh.write(b"more\n")
    assert sha256_of(f) == _reference(f)
    st = f.stat()
    os.utime(f, ns=(st.st_atime_ns, st.st_mtime_ns + 1))  # same size, new time
    f.write_bytes(b"x" * st.st_size)
    assert sha256_of(f) == _reference(f)


def test_cache_off_and_unwritable(tmp_path, monkeypatch) -> None:
    f = tmp_path / "a.dat"
    f.write_bytes(os.urandom(10_000))
    monkeypatch.setenv("EVTKIN_CACHE_DIR", "off")
    assert cache_dir() is None
    assert sha256_of(f) == _reference(f)
    blocker = tmp_path / "not-a-dir"
    blocker.write_text("file")
    monkeypatch.setenv("EVTKIN_CACHE_DIR", str(blocker))  # cannot hold entries
    assert sha256_of(f) == _reference(f)
    monkeypatch.delenv("EVTKIN_CACHE_DIR")
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    assert cache_dir() == tmp_path / "xdg" / "evtkin"


def test_bad_cache_entries_are_ignored_and_rewritten(tmp_path, monkeypatch) -> None:
    # FIPS 180-4: a SHA-256 digest is 256 bits, 64 hexadecimal digits
    monkeypatch.setenv("EVTKIN_CACHE_DIR", str(tmp_path / "cache"))
    f = tmp_path / "sample.lhe"
    f.write_bytes(b"<event>\n" * 100)
    assert sha256_of(f) == _reference(f)
    entry = next((tmp_path / "cache").rglob("*.json"))
    good = entry.read_text()
    for bad in ("[1, 2]", '"text"', "{}", good.replace(_reference(f), "zz" * 32),
                good.replace(_reference(f), "0" * 63), good.replace(_reference(f), "'; rm x"),
                "{not json"):
        entry.write_text(bad)
        assert sha256_of(f) == _reference(f)
        assert entry.read_text() == good  # rewritten
