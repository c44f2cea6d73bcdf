"""Client side of the sheetfuncs worker: one process, JSON lines over its stdin / stdout.

Standard library only: the LibreOffice extension ships this file and runs it
in LibreOffice's own Python (``component.py`` imports it); sheetfuncs' tests
import it as ``sheetfuncs.calcext.client``.  ``Worker.call`` never raises: a
failure becomes the text a cell shows, starting with the error mark.
"""
import collections
import json
import os
import queue
import select
import subprocess
import threading
import time


class WorkerUnavailable(Exception):
    pass


class Worker:
    """One sheetfuncs process, spoken to in JSON lines over its stdin / stdout."""

    def __init__(self, config, error_mark="#SF!", start_timeout=120.0, call_timeout=120.0, on_ready=None):
        self.config = config
        self.on_ready = on_ready      # called with the seconds from start to ready
        self.error_mark = error_mark
        self.start_timeout = start_timeout
        self.call_timeout = call_timeout
        self.lock = threading.RLock()
        self.proc = None
        self.answers = None
        self.stderr_tail = collections.deque(maxlen=20)
        self.ready = False
        self.failed = None            # (time, message) of the last failed start
        self.next_id = 0
        self.starts = 0
        self.started_at = None
        self.start_seconds = None     # start to first line, of the last start

    # -- process
    def _env(self):
        env = dict(os.environ)
        for key in ("PYTHONHOME", "PYTHONPATH", "PYTHONSTARTUP", "PYTHONNOUSERSITE"):
            env.pop(key, None)
        path = [p for p in self.config.get("path") or [] if p]
        if path:
            env["PYTHONPATH"] = os.pathsep.join(path)
        env["PYTHONIOENCODING"] = "utf-8"
        env.update(self.config.get("env") or {})
        return env

    def start(self):
        """Start the process (returns at once; ``_wait_ready`` waits for its first line)."""
        with self.lock:
            if self.proc is not None and self.proc.poll() is None:
                return
            python = self.config.get("python") or ""
            if not python or not os.path.isfile(python):
                raise WorkerUnavailable(
                    "the Python recorded at install time is missing (%s); run 'sheetfuncs libreoffice "
                    "install' again from the environment that has sheetfuncs" % (python or "none"))
            kw = {}
            if os.name == "nt":
                kw["creationflags"] = getattr(subprocess, "CREATE_NO_WINDOW", 0)
            self.proc = subprocess.Popen(
                [python, "-u", "-m", "sheetfuncs.calcext.worker"], stdin=subprocess.PIPE,
                stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=self._env(),
                cwd=os.path.expanduser("~"), **kw)
            self.starts += 1
            self.started_at = time.perf_counter()
            self.ready = False
            self.stderr_tail.clear()
            self._buf = b""
            if os.name == "posix":          # answers read in the calling thread (select): fastest
                self.answers = None
            else:                           # no select on pipes: a reader thread and a queue
                self.answers = queue.Queue()
                threading.Thread(target=self._pump_out, args=(self.proc, self.answers), daemon=True).start()
            threading.Thread(target=self._pump_err, args=(self.proc,), daemon=True).start()

    def _pump_out(self, proc, answers):
        for raw in proc.stdout:
            try:
                answers.put(json.loads(raw.decode("utf-8")))
            except ValueError:
                answers.put({"bad": raw[:200].decode("utf-8", "replace")})
        answers.put(None)                             # end of output: the process ended

    def _next(self, timeout):
        """The next answer (a dict), None when the process ended; queue.Empty after timeout."""
        if self.answers is not None:
            return self.answers.get(timeout=timeout)
        fd = self.proc.stdout.fileno()
        deadline = time.monotonic() + timeout
        while b"\n" not in self._buf:
            left = deadline - time.monotonic()
            if left <= 0 or not select.select([fd], [], [], left)[0]:
                raise queue.Empty
            chunk = os.read(fd, 1 << 16)
            if not chunk:
                return None
            self._buf += chunk
        line, self._buf = self._buf.split(b"\n", 1)
        try:
            return json.loads(line.decode("utf-8"))
        except ValueError:
            return {"bad": line[:200].decode("utf-8", "replace")}

    def _pump_err(self, proc):
        for raw in proc.stderr:
            line = raw.decode("utf-8", "replace").rstrip()
            if line:
                self.stderr_tail.append(line)

    def stop(self):
        with self.lock:
            proc, self.proc, self.ready = self.proc, None, False
            if proc is None:
                return
            try:
                proc.stdin.close()
            except OSError:
                pass
            try:
                proc.wait(timeout=2)
            except subprocess.TimeoutExpired:
                proc.kill()
                try:
                    proc.wait(timeout=2)
                except subprocess.TimeoutExpired:
                    pass

    def _last_words(self):
        time.sleep(0.05)                              # let the stderr pump catch up
        lines = [l for l in self.stderr_tail if l.strip()]
        return lines[-1] if lines else "no message"

    def _wait_ready(self):
        if self.ready:
            return
        try:
            first = self._next(self.start_timeout)
        except queue.Empty:
            self.stop()
            raise WorkerUnavailable("it did not start within %.0f s" % self.start_timeout)
        if first is None:
            code = self.proc.poll() if self.proc else None
            words = self._last_words()
            self.stop()
            raise WorkerUnavailable("it ended at start (exit status %s: %s)" % (code, words))
        if "fatal" in first:
            self.stop()
            raise WorkerUnavailable(first["fatal"])
        if "ready" not in first:
            self.stop()
            raise WorkerUnavailable("it answered %r at start" % (first,))
        self.ready = True
        self.start_seconds = time.perf_counter() - self.started_at
        if self.on_ready is not None:
            self.on_ready(self.start_seconds)

    def _ensure(self):
        if self.failed and time.monotonic() - self.failed[0] < 5.0:
            raise WorkerUnavailable(self.failed[1])       # no start storm over many cells
        try:
            self.start()
            self._wait_ready()
        except WorkerUnavailable as exc:
            self.failed = (time.monotonic(), str(exc))
            raise
        except OSError as exc:
            self.failed = (time.monotonic(), "cannot start %s (%s)" % (self.config.get("python"), exc))
            raise WorkerUnavailable(self.failed[1])
        self.failed = None

    # -- calls
    def call(self, name, args, names):
        """The cell value of one function call (never raises)."""
        with self.lock:
            for attempt in (1, 2):
                try:
                    self._ensure()
                except WorkerUnavailable as exc:
                    return "%s sheetfuncs worker unavailable: %s" % (self.error_mark, exc)
                self.next_id += 1
                line = json.dumps({"id": self.next_id, "f": name, "a": args, "names": names}) + "\n"
                try:
                    self.proc.stdin.write(line.encode("utf-8"))
                    self.proc.stdin.flush()
                    answer = self._next(self.call_timeout)
                except (OSError, ValueError):
                    answer = None                      # broken pipe: it died
                except queue.Empty:
                    self.stop()
                    return ("%s the sheetfuncs worker gave no answer within %.0f s (it was restarted; "
                            "recalculate to try again)" % (self.error_mark, self.call_timeout))
                if answer is None:                     # it died: start a new one, once
                    words = self._last_words()
                    self.stop()
                    if attempt == 2:
                        return "%s the sheetfuncs worker stopped while computing (%s)" % (self.error_mark, words)
                    continue
                if "r" in answer:
                    return answer["r"]
                return answer.get("e") or "%s unexpected answer from the worker" % self.error_mark
        return "%s the sheetfuncs worker is unavailable" % self.error_mark
