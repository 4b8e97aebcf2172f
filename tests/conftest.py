"""Shared test fixtures."""

import atexit
import contextlib
import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import threading
import uuid
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def run_cli(*args, cwd=None, timeout=300, env=None, input=None):
    """Run the real ``curvefit`` command line in its own process; returns CompletedProcess.

    The process is forked from a server that has the big libraries imported already
    (tests/cli_server.py), which saves about a second of start-up per command; it runs
    as ``python -m curvefit.cli.main`` would. An environment change that those libraries
    read when imported (thread counts, Python or matplotlib settings), or
    CURVEFIT_TEST_FORK=0, runs a fresh interpreter instead.
    """
    e = dict(os.environ)
    e.update(env or {})
    argv = [str(a) for a in args]
    address = None if _import_sensitive(e) else _fork_server()
    if address is not None:
        try:
            return _run_forked(address, argv, str(Path(cwd or os.getcwd()).resolve()), e, timeout, input)
        except _ServerGone:
            pass  # the command did not start: run it in a fresh interpreter
    return subprocess.run([sys.executable, "-m", "curvefit.cli.main", *argv],
                          capture_output=True, text=True, cwd=cwd, timeout=timeout,
                          env=e, input=input)


class _ServerGone(Exception):
    """The fork server could not be reached before the command started."""


_SERVER: dict = {}
_SERVER_LOCK = threading.Lock()
_IMPORT_SENSITIVE = ("OMP_", "OPENBLAS_", "MKL_", "BLIS_", "VECLIB_", "NUMEXPR_", "PYTHON",
                     "MPLBACKEND", "MPLCONFIGDIR", "MALLOC_", "LD_", "SKLEARN_", "JOBLIB_", "LOKY_")


def _import_sensitive(env: dict) -> bool:
    if env.get("CURVEFIT_TEST_FORK") == "0":
        return True
    base = _SERVER.get("env", os.environ)
    changed = {k for k in set(env) | set(base) if env.get(k) != base.get(k)}
    return any(k.startswith(_IMPORT_SENSITIVE) for k in changed)


def _fork_server() -> str | None:
    """The server's socket address, starting it on first use (None: it could not start)."""
    with _SERVER_LOCK:
        if "address" not in _SERVER:
            _SERVER["address"] = None
            folder = tempfile.mkdtemp(prefix="curvefit-test-cli-")
            address = os.path.join(folder, "socket")
            proc = subprocess.Popen([sys.executable, str(Path(__file__).with_name("cli_server.py")),
                                     address], stdin=subprocess.PIPE, stdout=subprocess.PIPE, cwd=ROOT)
            if proc.stdout.readline().strip() == b"ready":
                _SERVER.update(address=address, proc=proc, folder=folder, env=dict(os.environ))
                atexit.register(_stop_server)
            else:
                proc.kill()
        return _SERVER["address"]


def _stop_server() -> None:
    proc = _SERVER.get("proc")
    if proc is not None:
        proc.stdin.close()
        proc.wait(timeout=30)
        shutil.rmtree(_SERVER["folder"], ignore_errors=True)


def _run_forked(address: str, argv: list[str], cwd: str, env: dict, timeout, input):
    files = {name: os.path.join(_SERVER["folder"], f"{uuid.uuid4().hex}.{name}")
             for name in ("stdin", "stdout", "stderr")}
    for name in files:
        Path(files[name]).write_text(input if name == "stdin" and input is not None else "")
    try:
        with socket.socket(socket.AF_UNIX, socket.SOCK_STREAM) as conn:
            try:
                conn.connect(address)
                conn.settimeout(timeout)
                stream = conn.makefile("rwb", buffering=0)
                stream.write((json.dumps(dict(files, args=argv, cwd=cwd, env=env)) + "\n").encode())
                started = stream.readline().split()
            except OSError:
                raise _ServerGone from None
            if len(started) != 2 or started[0] != b"pid":
                raise _ServerGone
            pid = int(started[1])
            try:
                code = int(stream.readline().split()[1])
            except (TimeoutError, socket.timeout):
                with contextlib.suppress(OSError):
                    os.kill(pid, signal.SIGKILL)
                raise subprocess.TimeoutExpired(argv, timeout) from None
        # decoded with universal newlines, as subprocess.run(text=True) does
        out, err = (Path(files[name]).read_bytes().decode().replace("\r\n", "\n").replace("\r", "\n")
                    for name in ("stdout", "stderr"))
    finally:
        for path in files.values():
            with contextlib.suppress(OSError):
                os.unlink(path)
    return subprocess.CompletedProcess([sys.executable, "-m", "curvefit.cli.main", *argv], code,
                                       out, err)


def kill_when_journaled(args, out, journal, lines: int, timeout: float = 120):
    """Start ``curvefit <args> --out OUT`` in a real process, SIGKILL it as soon as its
    journal holds ``lines`` lines (header included), and wait for it to end; fails the
    test when the run finishes first or the lines never come."""
    import signal
    import time

    proc = subprocess.Popen([sys.executable, "-m", "curvefit.cli.main", *map(str, args),
                             "--out", str(out)],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, cwd=ROOT)
    deadline = time.time() + timeout
    while time.time() < deadline:
        if journal.exists() and len(journal.read_text().splitlines()) >= lines:
            break
        if proc.poll() is not None:
            pytest.fail("the run finished before it could be killed")
        time.sleep(0.05)
    proc.send_signal(signal.SIGKILL)
    proc.wait()


@pytest.fixture
def cli():
    return run_cli
