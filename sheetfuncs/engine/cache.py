"""Result caches.

- ``memo``: an in-process LRU cache for engine entry points, keyed on the
  normalised input (expression text, parameters, options).  Results are
  frozen, so sharing them is safe.
- ``ResultStore``: a persistent cache of JSON-ready results in SQLite (the
  user's cache folder), safe when several processes fill at once (WAL mode,
  busy timeout, upsert).

``SHEETFUNCS_CACHE=off`` turns both off (for cold timings).
"""
from __future__ import annotations

import functools
import hashlib
import json
import os
import threading
from collections import OrderedDict
from pathlib import Path

from .. import __version__

MEMO_SIZE = 2048


def enabled() -> bool:
    return os.environ.get("SHEETFUNCS_CACHE", "on").strip().lower() not in ("off", "0", "no", "false")


def _freeze(value):
    if isinstance(value, dict):
        return tuple(sorted((str(k), _freeze(v)) for k, v in value.items()))
    if isinstance(value, (list, tuple)):
        return tuple(_freeze(v) for v in value)
    if isinstance(value, str):
        return value.strip()
    try:
        hash(value)
        return value
    except TypeError:
        return repr(value)


def memo(func):
    """LRU-cache ``func`` on its (frozen) arguments, unless caching is off."""
    store: OrderedDict = OrderedDict()
    lock = threading.Lock()

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        if not enabled():
            return func(*args, **kwargs)
        key = (_freeze(args), _freeze(kwargs))
        with lock:
            if key in store:
                store.move_to_end(key)
                return store[key]
        value = func(*args, **kwargs)
        with lock:
            store[key] = value
            if len(store) > MEMO_SIZE:
                store.popitem(last=False)
        return value

    wrapper.cache_clear = store.clear
    return wrapper


def default_cache_dir() -> Path:
    base = os.environ.get("SHEETFUNCS_CACHE_DIR")
    if base:
        return Path(base)
    if os.name == "nt":
        return Path(os.environ.get("LOCALAPPDATA", Path.home())) / "sheetfuncs"
    return Path(os.environ.get("XDG_CACHE_HOME", Path.home() / ".cache")) / "sheetfuncs"


@functools.lru_cache(maxsize=1)
def code_stamp() -> str:
    """Hash of the package's own source, so results computed by other code
    (an upgrade, a developer's edit) are never served from the store."""
    root = Path(__file__).resolve().parent.parent
    h = hashlib.sha256(__version__.encode())
    for path in sorted(root.rglob("*.py")):
        h.update(path.relative_to(root).as_posix().encode())
        h.update(path.read_bytes())
    return h.hexdigest()[:16]


def make_key(*parts) -> str:
    text = json.dumps([code_stamp(), *parts], sort_keys=True, default=repr, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


class ResultStore:
    """Persistent key -> JSON value store in SQLite."""

    def __init__(self, path: str | os.PathLike | None = None):
        self.path = Path(path) if path else default_cache_dir() / "results.sqlite3"
        self._conn = None

    def _db(self):
        if self._conn is None:
            import sqlite3              # on use: Pyodide (xlwings Lite) loads it apart
            self.path.parent.mkdir(parents=True, exist_ok=True)
            conn = sqlite3.connect(self.path, timeout=30, isolation_level=None,
                                   check_same_thread=False)
            conn.execute("PRAGMA journal_mode=WAL")
            conn.execute("PRAGMA synchronous=NORMAL")
            conn.execute("CREATE TABLE IF NOT EXISTS results (key TEXT PRIMARY KEY, value TEXT NOT NULL)")
            self._conn = conn
        return self._conn

    def get(self, key: str):
        if not enabled():
            return None
        row = self._db().execute("SELECT value FROM results WHERE key = ?", (key,)).fetchone()
        return None if row is None else json.loads(row[0])

    def get_many(self, keys) -> dict:
        if not enabled():
            return {}
        keys = list(keys)
        out = {}
        db = self._db()
        for i in range(0, len(keys), 500):
            chunk = keys[i:i + 500]
            marks = ",".join("?" * len(chunk))
            for k, v in db.execute(f"SELECT key, value FROM results WHERE key IN ({marks})", chunk):
                out[k] = json.loads(v)
        return out

    def put_many(self, items: dict) -> None:
        if not enabled() or not items:
            return
        db = self._db()
        rows = [(k, json.dumps(v, separators=(",", ":"))) for k, v in items.items()]
        db.execute("BEGIN IMMEDIATE")
        try:
            db.executemany("INSERT INTO results(key, value) VALUES(?, ?) "
                           "ON CONFLICT(key) DO UPDATE SET value = excluded.value", rows)
            db.execute("COMMIT")
        except BaseException:
            db.execute("ROLLBACK")
            raise

    def put(self, key: str, value) -> None:
        self.put_many({key: value})

    def close(self):
        if self._conn is not None:
            self._conn.close()
            self._conn = None
