"""Result caches.

- ``memo``: an in-process LRU cache for engine entry points, keyed on the
  normalised input (expression text, parameters, options).  Results are
  frozen, so sharing them is safe.
- ``ResultStore``: a persistent cache of JSON-ready results in SQLite (the
  user's cache folder), safe when several processes fill at once (WAL mode,
  upsert); sqlite3 is imported on first use, and any problem with the store
  turns it off with one warning (see ``ResultStore``).

``SHEETFUNCS_CACHE=off`` turns both off (for cold timings).
"""
from __future__ import annotations

import functools
import hashlib
import json
import os
import random
import threading
import time
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


class CacheWarning(UserWarning):
    """The persistent result store turned itself off (the run goes on without it)."""


#: most time one store spends waiting for a lock held by another process, in all
WAIT_BUDGET = 1.0
_CORRUPT_CODES = (11, 26)           # SQLITE_CORRUPT, SQLITE_NOTADB
_BUSY_CODES = (5, 6)                # SQLITE_BUSY, SQLITE_LOCKED


def _sqlite():
    """sqlite3, imported on first use: a Python built without it (Pyodide) still
    imports the package; the store then turns itself off."""
    import sqlite3
    return sqlite3


class ResultStore:
    """Persistent key -> JSON value store in SQLite.

    A cache is only ever an accelerator, so every problem with it -- a file that
    is not a database, a folder in its place, a read-only or full disk, a folder
    that cannot be created, a lock held by another process (in any locking mode),
    no sqlite3 in this Python -- turns the store off with *one* warning (through
    ``warn``, else ``warnings.warn(CacheWarning)``) and the caller carries on:
    ``get`` misses, ``put_many`` does nothing.  Never an exception, never a
    wrong value.  Waits on locks are our own short retries (SQLite's busy
    timeout is 0) and add up to at most ``WAIT_BUDGET`` seconds per store.  A
    corrupt database (SQLITE_CORRUPT / SQLITE_NOTADB) is renamed aside as
    ``results.sqlite3.corrupt-<time>`` and a fresh one is started (once per store).
    Rows that do not decode read as misses.
    """

    def __init__(self, path: str | os.PathLike | None = None, *, warn=None,
                 wait_budget: float | None = None):
        self.path = Path(path) if path else default_cache_dir() / "results.sqlite3"
        self._conn = None
        self._ident = None
        self.warn = warn
        self.budget = WAIT_BUDGET if wait_budget is None else float(wait_budget)
        self.waited = 0.0
        self.off: str | None = None          #: why the store is off, once it is
        self.warning: str | None = None      #: the one warning given
        self.set_aside: str | None = None    #: where a corrupt database was moved

    # -- connection
    def _db(self):
        if self._conn is None:
            sqlite3 = _sqlite()
            self.path.parent.mkdir(parents=True, exist_ok=True)
            conn = sqlite3.connect(self.path, timeout=0, isolation_level=None,
                                   check_same_thread=False)
            try:
                conn.execute("PRAGMA busy_timeout=0")
                mode = conn.execute("PRAGMA journal_mode").fetchone()
                if not mode or str(mode[0]).lower() != "wal":     # switching needs the write lock:
                    conn.execute("PRAGMA journal_mode=WAL")       # only when not already WAL
                conn.execute("PRAGMA synchronous=NORMAL")
                conn.execute("CREATE TABLE IF NOT EXISTS results "
                             "(key TEXT PRIMARY KEY, value TEXT NOT NULL)")
            except BaseException:
                conn.close()
                raise
            try:
                st = os.stat(self.path)
                self._ident = (st.st_dev, st.st_ino)
            except OSError:
                self._ident = None
            self._conn = conn
        return self._conn

    def _close_quietly(self):
        if self._conn is not None:
            try:
                self._conn.close()
            except Exception:  # noqa: BLE001 - closing a broken connection
                pass
            self._conn = None

    def _disable(self, why: str) -> None:
        self._close_quietly()
        if self.off is not None:
            return
        self.off = why
        self.warning = f"result cache off ({why}): {self.path}; carrying on without it"
        if self.warn is not None:
            self.warn(self.warning)
        else:
            import warnings
            warnings.warn(self.warning, CacheWarning, stacklevel=4)

    def _set_aside(self) -> bool:
        """Move a corrupt database (and its -wal/-shm) aside; True if a fresh start is possible."""
        self._close_quietly()
        if self.set_aside is not None:
            return False                     # corrupt again right after a fresh start: give up
        try:
            st = os.stat(self.path)
            if self._ident is not None and (st.st_dev, st.st_ino) != self._ident:
                self.set_aside = "(replaced by another process)"
                return True                  # someone else already set it aside
            if not self.path.is_file():
                return False
            aside = self.path.with_name(f"{self.path.name}.corrupt-{time.strftime('%Y%m%d-%H%M%S')}"
                                        f"-{os.getpid()}")
            os.replace(self.path, aside)
            for extra in ("-wal", "-shm"):
                try:
                    os.replace(str(self.path) + extra, str(aside) + extra)
                except OSError:
                    pass
        except OSError:
            return False
        self.set_aside = str(aside)
        self._ident = None
        return True

    def _guard(self, op, default):
        """Run ``op(connection)``; every problem turns the store off and gives ``default``."""
        if self.off is not None or not enabled():
            return default
        pause = 0.005
        while True:
            try:
                sqlite3 = _sqlite()
            except ImportError:
                self._disable("this Python has no sqlite3 module")
                return default
            try:
                return op(self._db())
            except sqlite3.DatabaseError as e:
                code = getattr(e, "sqlite_errorcode", None)
                text = str(e)
                if (code is not None and code & 0xFF in _BUSY_CODES) or (
                        code is None and ("locked" in text or "busy" in text)):
                    self._close_quietly()
                    left = self.budget - self.waited
                    if left <= 0:
                        self._disable("locked by another process")
                        return default
                    # jitter: two stores retrying on one schedule would collide every time
                    step = min(pause * random.uniform(0.5, 1.5), left)
                    time.sleep(step)
                    self.waited += step
                    pause = min(pause * 2, 0.1)
                    continue
                if (code is not None and code & 0xFF in _CORRUPT_CODES) or (
                        code is None and ("not a database" in text or "malformed" in text)):
                    if self._set_aside():
                        self._warn_once_aside()
                        continue
                    self._disable(f"damaged database: {text}")
                    return default
                self._disable(text or type(e).__name__)
                return default
            except OSError as e:
                self._disable(f"cannot use its folder: {e.strerror or e}")
                return default
            except (ValueError, MemoryError) as e:
                self._disable(f"{type(e).__name__}: {e}")
                return default

    def _warn_once_aside(self):
        msg = (f"result cache was damaged; moved aside to {self.set_aside} and started afresh")
        if self.warn is not None:
            self.warn(msg)
        else:
            import warnings
            warnings.warn(msg, CacheWarning, stacklevel=5)

    @staticmethod
    def _decode(text):
        try:
            return json.loads(text)
        except (TypeError, ValueError, RecursionError):
            return None

    # -- public
    def get(self, key: str):
        def op(db):
            row = db.execute("SELECT value FROM results WHERE key = ?", (key,)).fetchone()
            return None if row is None else self._decode(row[0])
        return self._guard(op, None)

    def get_many(self, keys) -> dict:
        keys = list(keys)

        def op(db):
            out = {}
            for i in range(0, len(keys), 500):
                chunk = keys[i:i + 500]
                marks = ",".join("?" * len(chunk))
                for k, v in db.execute(f"SELECT key, value FROM results WHERE key IN ({marks})", chunk):
                    value = self._decode(v)
                    if value is not None:
                        out[k] = value
            return out
        return self._guard(op, {})

    def put_many(self, items: dict) -> None:
        if not items:
            return
        try:
            rows = [(k, json.dumps(v, separators=(",", ":"), allow_nan=True)) for k, v in items.items()]
        except (TypeError, ValueError, RecursionError):
            return                            # a value that cannot be stored is simply not cached

        def op(db):
            db.execute("BEGIN IMMEDIATE")
            try:
                db.executemany("INSERT INTO results(key, value) VALUES(?, ?) "
                               "ON CONFLICT(key) DO UPDATE SET value = excluded.value", rows)
                db.execute("COMMIT")
            except BaseException:
                try:
                    db.execute("ROLLBACK")
                except Exception:  # noqa: BLE001 - the error that matters is re-raised
                    pass
                raise
        self._guard(op, None)

    def put(self, key: str, value) -> None:
        self.put_many({key: value})

    def close(self):
        self._close_quietly()
