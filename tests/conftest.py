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


def default_signals() -> None:
    """``preexec_fn`` for a command a test stops with a signal: SIGINT, SIGTERM and SIGHUP
    back to their defaults. A suite started in the background (``cmd &``) or under
    ``nohup`` passes them on ignored, and the command rightly keeps an ignored SIGHUP
    (nohup stays nohup) and Python an ignored SIGINT, so the signal would do nothing."""
    for sig in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP):
        signal.signal(sig, signal.SIG_DFL)


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
        proc.stdout.close()
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


# what a source checkout has that a wheel must not need
_NOT_SOURCE = shutil.ignore_patterns(".git", ".venv", "build", "dist", "*.egg-info", "__pycache__",
                                     ".pytest_cache", ".hypothesis", "curvefit-demo", "corpus")


def run_checked(args, *, cwd, timeout, env) -> subprocess.CompletedProcess:
    """Run a program; fails the test with its output when it exits non-zero."""
    r = subprocess.run([str(a) for a in args], cwd=cwd, env=env, capture_output=True, text=True,
                       timeout=timeout)
    command = " ".join(map(str, args))
    assert r.returncode == 0, f"{command} failed ({r.returncode}):\n{r.stdout[-3000:]}\n{r.stderr[-3000:]}"
    return r


@pytest.fixture(scope="session")
def installed_demo(tmp_path_factory):
    """`curvefit demo` run once, from an empty folder, by the built wheel installed (not
    editable) into a fresh virtual environment: what a user gets from ``pip install``.

    tests/test_wheel.py checks the install, tests/test_demo.py what the demo wrote and
    printed: one demo run serves both. The wheel is built from a copy of the checkout (so
    the build leaves nothing in it) with pip's build isolation, and installed with
    ``--no-deps`` into a venv without pip of its own whose site-packages also lists the
    project venv's (a .pth line: the libraries there, not their .pth files, so not the
    editable checkout); ``pip check`` then proves that the wheel's declared requirements
    are met. The libraries are the ones scripts/_venv.sh installed from the same list in
    pyproject.toml; installing them again from the registry took minutes.
    """
    import sysconfig
    from types import SimpleNamespace

    tmp = tmp_path_factory.mktemp("wheel")
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "VIRTUAL_ENV", "PYTHONHOME")}
    env["PIP_DISABLE_PIP_VERSION_CHECK"] = "1"
    source = tmp / "source"
    shutil.copytree(ROOT, source, ignore=_NOT_SOURCE)
    pip = [sys.executable, "-m", "pip"]
    run_checked([*pip, "wheel", "--quiet", "--no-deps", "-w", tmp / "wheels", source], cwd=tmp,
                timeout=900, env=env)
    (wheel,) = (tmp / "wheels").glob("curvefit-*.whl")

    venv = tmp / "venv"
    run_checked([sys.executable, "-m", "venv", "--without-pip", venv], cwd=tmp, timeout=300, env=env)
    python = venv / "bin" / "python"
    site = run_checked([python, "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
                       cwd=tmp, timeout=120, env=env).stdout.strip()
    ours = dict.fromkeys(sysconfig.get_paths()[k] for k in ("purelib", "platlib"))
    Path(site, "project-libraries.pth").write_text("".join(f"{p}\n" for p in ours))
    run_checked([*pip, "--python", python, "install", "--quiet", "--no-deps", wheel], cwd=tmp,
                timeout=900, env=env)
    check = subprocess.run([*pip, "--python", python, "check"], cwd=tmp, env=env,
                           capture_output=True, text=True, timeout=300)
    where = run_checked([python, "-c", "import curvefit; print(curvefit.__file__)"], cwd=tmp,
                        timeout=120, env=env).stdout.strip()

    empty = tmp / "empty"
    empty.mkdir()
    out = empty / "demo-out"
    demo = subprocess.run([venv / "bin" / "curvefit", "demo", "--out", out], cwd=empty, env=env,
                          capture_output=True, text=True, timeout=1800)
    return SimpleNamespace(venv=venv, wheel=wheel, check=check, where=Path(where), out=out, demo=demo)
