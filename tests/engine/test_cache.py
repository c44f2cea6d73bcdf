"""Caches: the in-process memo and the SQLite store (real sqlite3, two
processes writing at once)."""
import os
import subprocess

import pytest
import sys

import sheetfuncs as sf
from sheetfuncs.engine import cache


def test_memo_returns_same_frozen_result(monkeypatch):
    monkeypatch.setenv("SHEETFUNCS_CACHE", "on")
    a = sf.invert("1/(s+7)")
    assert sf.invert("1/(s+7)") is a


def test_cache_off(monkeypatch):
    monkeypatch.setenv("SHEETFUNCS_CACHE", "off")
    assert sf.invert("1/(s+8)") is not sf.invert("1/(s+8)")


@pytest.fixture(autouse=True)
def cache_on(monkeypatch):
    monkeypatch.setenv("SHEETFUNCS_CACHE", "on")


def test_store_roundtrip(tmp_path):
    store = cache.ResultStore(tmp_path / "c.sqlite3")
    key = cache.make_key("invert", "1/(s+1)", {})
    assert store.get(key) is None
    store.put(key, {"f_t": "exp(-t)", "y": [1.0, 2.0]})
    assert cache.ResultStore(tmp_path / "c.sqlite3").get(key) == {"f_t": "exp(-t)", "y": [1.0, 2.0]}
    assert store.get_many([key, "nope"]) == {key: {"f_t": "exp(-t)", "y": [1.0, 2.0]}}


def test_store_two_writers_at_once(tmp_path):
    db = tmp_path / "c.sqlite3"
    code = ("import sys; from sheetfuncs.engine.cache import ResultStore\n"
            "st = ResultStore(sys.argv[1]); w = sys.argv[2]\n"
            "for i in range(200): st.put_many({f'{w}{i}': [i]})\n")
    env = dict(os.environ, SHEETFUNCS_CACHE="on")
    procs = [subprocess.Popen([sys.executable, "-c", code, str(db), w], env=env) for w in "ab"]
    assert all(p.wait(timeout=120) == 0 for p in procs)
    store = cache.ResultStore(db)
    got = store.get_many([f"{w}{i}" for w in "ab" for i in range(200)])
    assert len(got) == 400 and got["b199"] == [199]
