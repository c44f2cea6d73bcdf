"""Test-session settings: a private, empty result cache for the whole run."""
import os
import tempfile

_CACHE = tempfile.mkdtemp(prefix="sheetfuncs-test-cache-")
os.environ["SHEETFUNCS_CACHE_DIR"] = _CACHE
os.environ.setdefault("SHEETFUNCS_CACHE", "on")
