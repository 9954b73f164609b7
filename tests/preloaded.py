"""A Python interpreter that has imported the app once and forks a real process for each server.

Importing the app takes seconds of CPU (half a minute on a busy two-core machine), and the
end-to-end tests start about twenty servers. ``run(["-m", "uvicorn", ...])`` therefore asks one
interpreter that imported ``app.main``, ``app.cli`` and uvicorn at the start of the session to
fork; the child takes the command's environment, working folder and output file, and runs
``python -m MODULE ARGS`` exactly as the command line does (``runpy``, as ``-m`` does): a
separate operating-system process serving real HTTP on its own port, with the app built from
its own ``ATTESTA_*`` variables (no module of the app reads the environment on import,
app/config.py). The preloaded interpreter imports only; it starts no thread and opens no
database, so nothing is shared with the children but read-only code.

Run as ``python -m tests.preloaded``, it reads one JSON request a line on stdin and writes
``{"started": pid}`` for each, and ``{"exited": pid, "code": n}`` when a child ends.
"""

from __future__ import annotations

import atexit
import json
import os
import select
import signal
import subprocess
import sys
import threading
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
PRELOAD = ("app.main", "app.cli", "uvicorn.main", "uvicorn.protocols.http.h11_impl", "uvicorn.lifespan.on",
           "uvicorn.loops.asyncio", "uvicorn.supervisors.multiprocess")  # fmt: skip


# --- the forking side (python -m tests.preloaded) ----------------------------------------


def _serve_requests() -> dict | None:
    """Fork a child per request; return the request in the child, None in the parent once stdin closes."""
    live: set[int] = set()
    requests = sys.stdin.buffer
    replies = sys.stdout

    def reply(message: dict) -> None:
        replies.write(json.dumps(message) + "\n")
        replies.flush()

    def reap() -> None:
        for pid in list(live):
            done, status = os.waitpid(pid, os.WNOHANG)
            if done:
                live.discard(pid)
                reply({"exited": pid, "code": os.waitstatus_to_exitcode(status)})

    reply({"ready": os.getpid()})
    while True:
        readable, _, _ = select.select([requests], [], [], 0.05)
        reap()
        if not readable:
            continue
        line = requests.readline()
        if not line:  # the test session ended: stop what still runs
            for pid in live:
                os.kill(pid, signal.SIGTERM)
            for pid in live:
                os.waitpid(pid, 0)
            return None
        request = json.loads(line)
        pid = os.fork()
        if pid == 0:
            return request
        live.add(pid)
        reply({"started": pid})


def _become(request: dict) -> None:
    """In the forked child: take the command's stdin, output files, folder and environment."""
    for number, path, flags in ((0, os.devnull, os.O_RDONLY), (1, request["stdout"], os.O_WRONLY | os.O_APPEND),
                                (2, request["stderr"], os.O_WRONLY | os.O_APPEND)):  # fmt: skip
        opened = os.open(path, flags)
        os.dup2(opened, number)
        os.close(opened)
    sys.stdin = open(0, encoding="utf-8", closefd=False)  # noqa: SIM115 - the process's own stdio
    sys.stdout = open(1, "w", encoding="utf-8", closefd=False)  # noqa: SIM115
    sys.stderr = open(2, "w", encoding="utf-8", errors="backslashreplace", closefd=False, buffering=1)  # noqa: SIM115
    os.chdir(request["cwd"])
    os.environ.clear()
    os.environ.update(request["env"])
    sys.argv = ["-m", *request["args"]]


def _main() -> None:
    import importlib
    import runpy

    for name in PRELOAD:
        importlib.import_module(name)
    if threading.active_count() != 1:
        raise RuntimeError(f"importing the app started threads {threading.enumerate()}: forking is not safe")
    request = _serve_requests()
    if request is None:
        return
    _become(request)
    runpy.run_module(request["module"], run_name="__main__", alter_sys=True)


# --- the asking side (the test session) ---------------------------------------------------


class ForkedProcess:
    """A child of the preloaded interpreter, with the part of ``subprocess.Popen`` that servers need."""

    def __init__(self, pid: int, interpreter: "PreloadedInterpreter"):
        self.pid = pid
        self._interpreter = interpreter

    @property
    def returncode(self) -> int | None:
        return self._interpreter.exit_codes.get(self.pid)

    def poll(self) -> int | None:
        return self.returncode

    def wait(self, timeout: float | None = None) -> int:
        with self._interpreter.changed:
            if not self._interpreter.changed.wait_for(lambda: self.returncode is not None, timeout):
                raise subprocess.TimeoutExpired(f"process {self.pid}", timeout)
        return self.returncode

    def send_signal(self, number: int) -> None:
        with self._interpreter.changed:
            if self.returncode is None:  # not reaped yet, so the pid is still this child's
                try:
                    os.kill(self.pid, number)
                except ProcessLookupError:
                    pass

    def terminate(self) -> None:
        self.send_signal(signal.SIGTERM)

    def kill(self) -> None:
        self.send_signal(signal.SIGKILL)


class PreloadedInterpreter:
    """The test session's handle on ``python -m tests.preloaded``, started on first use."""

    def __init__(self) -> None:
        self.exit_codes: dict[int, int] = {}
        self.changed = threading.Condition()
        self._started: list[int] = []
        self._asking = threading.Lock()
        environment = {k: v for k, v in os.environ.items() if not k.startswith("ATTESTA_")}
        self._process = subprocess.Popen([sys.executable, "-m", "tests.preloaded"], cwd=ROOT, env=environment,
                                         stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)  # fmt: skip
        ready = self._process.stdout.readline()
        if not ready.startswith('{"ready"'):
            raise RuntimeError(f"the preloaded interpreter did not start (code {self._process.wait()})")
        threading.Thread(target=self._listen, name="preloaded-interpreter", daemon=True).start()

    def _listen(self) -> None:
        for line in self._process.stdout:
            message = json.loads(line)
            with self.changed:
                if "started" in message:
                    self._started.append(message["started"])
                else:
                    self.exit_codes[message["exited"]] = message["code"]
                self.changed.notify_all()
        with self.changed:  # the interpreter is gone (it stopped its children first)
            self.changed.notify_all()

    def run(self, module: str, args: list[str], *, env: dict[str, str], cwd: Path, stdout: str,
            stderr: str | None = None) -> ForkedProcess:
        """Fork a process that runs ``python -m module args`` with ``env`` in ``cwd``.

        Its standard output goes to the file ``stdout``, its standard error to ``stderr`` (the
        same file when None), its standard input is empty.
        """
        with self._asking, self.changed:
            if self._process.poll() is not None:
                raise RuntimeError(f"the preloaded interpreter stopped with code {self._process.returncode}")
            request = {"module": module, "args": list(args), "env": dict(env), "cwd": str(cwd), "stdout": stdout,
                       "stderr": stderr or stdout}  # fmt: skip
            self._process.stdin.write(json.dumps(request) + "\n")
            self._process.stdin.flush()
            if not self.changed.wait_for(lambda: self._started or self._process.poll() is not None, 60):
                raise RuntimeError("the preloaded interpreter did not fork within 60 s")
            if not self._started:
                raise RuntimeError(f"the preloaded interpreter stopped with code {self._process.returncode}")
            return ForkedProcess(self._started.pop(), self)

    def close(self) -> None:
        if self._process.poll() is None:
            self._process.stdin.close()
            try:
                self._process.wait(timeout=30)
            except subprocess.TimeoutExpired:
                self._process.kill()
                self._process.wait()


_interpreter: PreloadedInterpreter | None = None
_starting = threading.Lock()


def preloaded() -> PreloadedInterpreter:
    """The session's preloaded interpreter (started on first use, stopped when the session ends)."""
    global _interpreter
    with _starting:
        if _interpreter is None:
            _interpreter = PreloadedInterpreter()
            atexit.register(_interpreter.close)
        return _interpreter


if __name__ == "__main__":
    _main()
