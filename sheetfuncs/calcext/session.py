"""A headless LibreOffice on a user profile, driven through python3-uno (tests and benchmark).

``unodriver.py`` runs under LibreOffice's Python (which has no sheetfuncs) and answers JSON
commands; ``OfficeSession.ask`` sends one and returns its answer.  The environment has no
PYTHONPATH, so LibreOffice cannot import sheetfuncs: the extension's worker does that.
"""
from __future__ import annotations

import json
import os
import select
import signal
import subprocess

from ..errors import SheetfuncsError
from . import unodriver_path
from .install import office_env


class OfficeError(SheetfuncsError):
    """The driven LibreOffice failed, hung or refused a command."""


class OfficeSession:
    def __init__(self, profile, *, python: str, soffice: str | None = None, log=None, timeout: float = 300):
        env = office_env()
        if log:
            env["SHEETFUNCS_CALC_LOG"] = str(log)
        if soffice:
            env["SOFFICE"] = soffice
        self.timeout = timeout
        self.proc = subprocess.Popen([python, unodriver_path(), str(profile)], stdin=subprocess.PIPE,
                                     stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env,
                                     start_new_session=True)
        first = self._line()
        if '"ready"' not in first:
            raise OfficeError(f"the UNO driver did not start: {first} {self._err()}")

    def _err(self) -> str:
        try:
            return (self.proc.stderr.read() or "")[-800:] if self.proc.poll() is not None else ""
        except Exception:  # noqa: BLE001
            return ""

    def _line(self) -> str:
        ready, _, _ = select.select([self.proc.stdout], [], [], self.timeout)
        if not ready:
            self.close()
            raise OfficeError(f"LibreOffice gave no answer within {self.timeout:.0f} s")
        return self.proc.stdout.readline()

    def ask(self, cmd: str, **kw):
        self.proc.stdin.write(json.dumps({"cmd": cmd, **kw}) + "\n")
        self.proc.stdin.flush()
        line = self._line()
        if not line:
            raise OfficeError(f"the UNO driver ended: {self._err()}")
        answer = json.loads(line)
        if "error" in answer:
            raise OfficeError(f"{cmd}: {answer['error']}\n{answer.get('trace', '')[-1500:]}")
        return answer["ok"]

    def close(self) -> None:
        if self.proc.poll() is None:
            try:
                self.proc.stdin.close()
                self.proc.wait(timeout=60)
            except Exception:  # noqa: BLE001
                pass
        try:
            os.killpg(self.proc.pid, signal.SIGKILL)      # the group this session created
        except (ProcessLookupError, PermissionError, OSError):
            pass
