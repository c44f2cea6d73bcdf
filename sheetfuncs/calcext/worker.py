"""The long-lived sheetfuncs process behind the LibreOffice extension.

``python -m sheetfuncs.calcext.worker`` reads one JSON request a line on
stdin and writes one JSON answer a line on the stdout it had at start (what
the engine prints goes to stderr).  It ends when stdin closes, so it never
outlives the LibreOffice that started it.

Request ``{"id": n, "f": "SF_INVERSE", "a": [args], "names": {name: value}}``;
answer ``{"id": n, "r": value}`` (number, text, or rows of numbers and texts)
or ``{"id": n, "e": "text"}`` for a request it could not read.  The first
line it writes is ``{"ready": version}`` once sheetfuncs is imported, or
``{"fatal": "text"}`` when it cannot be.
"""
from __future__ import annotations

import json
import math
import os
import sys

def cell_value(value):
    """A cell function's result as Calc takes it: float, str, or rectangular rows of those."""
    from ..cellfuncs import ERROR_MARK, cap_text
    if isinstance(value, (list, tuple)):
        rows = [list(r) if isinstance(r, (list, tuple)) else [r] for r in value]
        if not rows:
            return ""
        width = max(len(r) for r in rows) or 1
        return [[cell_value(c) for c in r] + [""] * (width - len(r)) for r in rows]
    if value is None:
        return ""
    if isinstance(value, bool):
        return 1.0 if value else 0.0
    if isinstance(value, (int, float)):
        try:
            x = float(value)
        except OverflowError:
            return f"{ERROR_MARK} the number is too large for a cell"
        return x if math.isfinite(x) else f"{ERROR_MARK} the result is not a finite number ({x})"
    if isinstance(value, complex):
        return str(value)
    text = value if isinstance(value, str) else str(value)
    return cap_text(text)


def _args(values):
    """JSON arguments as cellfuncs takes them (ranges: lists of rows)."""
    return list(values)


class Answers:
    """Cell values by call, remembered (the cell functions are pure in their arguments and
    names).  The per-cell form of a table (``row``, ``col``) is answered from the whole
    table, computed once for all its cells."""

    def __init__(self, size: int = 4096):
        from .. import cellfuncs
        self.cf = cellfuncs
        self.size = size
        self.memo: dict = {}
        self.picks = {name: [a.name for a in cellfuncs.describe(name).args]
                      for name in cellfuncs.FUNCTIONS}

    def _whole(self, name, args, names):
        key = json.dumps([name, args, names], sort_keys=True, default=str)
        if key in self.memo:
            self.memo[key] = self.memo.pop(key)            # most recent last
            return self.memo[key]
        with self.cf.name_values(names):
            value = cell_value(self.cf.FUNCTIONS[name](*args))    # cell functions never raise
        self.memo[key] = value
        while len(self.memo) > self.size:
            self.memo.pop(next(iter(self.memo)))
        return value

    def __call__(self, name, args, names):
        arg_names = self.picks[name]
        full = list(args) + [None] * (len(arg_names) - len(args))
        if "row" in arg_names and "col" in arg_names:
            i, j = arg_names.index("row"), arg_names.index("col")
            row, col = full[i], full[j]
            if row not in (None, "") or col not in (None, ""):
                rest = [None if k in (i, j) else v for k, v in enumerate(full)]
                table = self._whole(name, rest, names)
                if not isinstance(table, list):
                    return table                            # an error: every cell says it
                with self.cf.name_values(names):
                    return cell_value(self.cf.cell(self.cf._pick)(table, row, col))
        return self._whole(name, full, names)


def serve(inp, out) -> None:
    from .. import __version__
    from .. import cellfuncs
    answers = Answers()
    out.write(json.dumps({"ready": __version__, "python": sys.executable}) + "\n")
    out.flush()
    for line in inp:
        if not line.strip():
            continue
        try:
            req = json.loads(line)
            cellfuncs.FUNCTIONS[req["f"]]
            args = _args(req.get("a") or [])
            names = req.get("names") or {}
        except (ValueError, KeyError, TypeError) as exc:
            answer = {"id": None, "e": f"{cellfuncs.ERROR_MARK} bad request to the worker ({exc})"}
        else:
            answer = {"id": req.get("id"), "r": answers(req["f"], args, names)}
        out.write(json.dumps(answer) + "\n")
        out.flush()


def main() -> int:
    # our answers go to a private copy of stdout; stray prints land on stderr
    out = os.fdopen(os.dup(sys.stdout.fileno()), "w", encoding="utf-8", newline="\n")
    os.dup2(sys.stderr.fileno(), sys.stdout.fileno())
    inp = open(sys.stdin.fileno(), encoding="utf-8", closefd=False)
    try:
        serve(inp, out)
    except ImportError as exc:      # pragma: no cover - a broken environment
        out.write(json.dumps({"fatal": f"cannot import sheetfuncs: {exc}"}) + "\n")
        out.flush()
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
