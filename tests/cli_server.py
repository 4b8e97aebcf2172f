"""A start-up server for the command-line tests.

Every CLI test runs ``python -m curvefit.cli.main ...`` as a real process. Most of such a
process's start-up is importing numpy, pandas, SciPy, scikit-learn, typer and rich. This
server imports those once and then, for each request, forks a child that runs the command
exactly as ``python -m`` would: its own process, working folder, environment, argv,
stdin, stdout and stderr files, and exit code (negative when a signal ended it, as
`subprocess` reports). curvefit itself is imported afresh in each child, so anything it
reads from the environment at import sees the test's environment.

A child ends as the interpreter's own exit does what a user can see (non-daemon threads
joined, atexit handlers run, garbage collected, standard streams flushed) and then leaves
with ``os._exit``: tearing down the modules inherited from the server would touch every
page of the copied heap, which cost about a second a command. The server freezes its own
objects (``gc.freeze``) so that a child's collections skip them for the same reason.

Protocol, on a Unix socket given as the first argument: the client sends one JSON line
``{"args", "cwd", "env", "stdin", "stdout", "stderr"}``; the server answers
``pid <n>`` once the command runs and ``exit <code>`` when it ends. The server ends when
its stdin closes (the test session is over or gone).
"""

from __future__ import annotations

import gc
import json
import os
import runpy
import selectors
import signal
import socket
import sys


def _preload() -> None:
    # the libraries a measure/fit/report command loads; not curvefit and not pyplot (its
    # backend choice reads the environment; matplotlib's own settings variables send a
    # command to a fresh interpreter, tests/conftest.py)
    import shlex  # noqa: F401
    import sqlite3  # noqa: F401
    import tomllib  # noqa: F401

    import joblib  # noqa: F401
    import matplotlib.backends.backend_agg  # noqa: F401
    import matplotlib.figure  # noqa: F401
    import matplotlib.ticker  # noqa: F401
    import numpy  # noqa: F401
    import pandas  # noqa: F401
    import rich.console  # noqa: F401
    import scipy.optimize  # noqa: F401
    import scipy.stats  # noqa: F401
    import sklearn.ensemble  # noqa: F401
    import sklearn.linear_model  # noqa: F401
    import sklearn.metrics  # noqa: F401
    import sklearn.model_selection  # noqa: F401
    import sklearn.neighbors  # noqa: F401
    import sklearn.pipeline  # noqa: F401
    import sklearn.preprocessing  # noqa: F401
    import sklearn.tree  # noqa: F401
    import threadpoolctl  # noqa: F401
    import typer  # noqa: F401
    try:  # what typer loads to read the options (pydantic), in versions that have it
        import typer._adapters  # noqa: F401
    except ImportError:
        pass


def _run_command(request: dict) -> None:
    """In the forked grandchild: become ``python -m curvefit.cli.main ARGS``; never returns."""
    code = 1
    try:
        os.chdir(request["cwd"])
        os.environ.clear()
        os.environ.update(request["env"])
        for fd, path, mode in ((0, request["stdin"], os.O_RDONLY),
                               (1, request["stdout"], os.O_WRONLY | os.O_TRUNC),
                               (2, request["stderr"], os.O_WRONLY | os.O_TRUNC)):
            opened = os.open(path, mode)
            os.dup2(opened, fd)
            os.close(opened)
        import tempfile

        tempfile.tempdir = None  # read TMPDIR again
        sys.path[0] = os.getcwd()  # `python -m` puts the working folder first
        sys.argv = [sys.argv[0], *request["args"]]  # run_module sets argv[0] to the module's file
        runpy.run_module("curvefit.cli.main", run_name="__main__", alter_sys=True)
        code = 0
    except SystemExit as stop:
        code = stop.code if isinstance(stop.code, int) else (0 if stop.code is None else 1)
        if not isinstance(stop.code, (int, type(None))):
            print(stop.code, file=sys.stderr)
    except BaseException:  # a traceback, as the interpreter would print it
        import traceback

        traceback.print_exc()
        code = 1
    _exit(code)


def _exit(code: int) -> None:
    """End the command as the interpreter's exit would, minus tearing down the modules."""
    import atexit
    import threading

    try:
        threading._shutdown()  # joins non-daemon threads (and runs their atexit hooks)
    except BaseException:
        import traceback

        traceback.print_exc()
    atexit._run_exitfuncs()  # loky's executor, weakref finalizers, logging, ...
    gc.collect()
    for stream in dict.fromkeys((sys.stdout, sys.stderr, sys.__stdout__, sys.__stderr__)):
        try:
            if stream is not None:
                stream.flush()
        except Exception:
            code = code or 120  # the interpreter's exit status when stdout cannot be flushed
    os._exit(code)


def _serve_one(conn: socket.socket) -> None:
    """In the forked child: read the request, run it in a grandchild, report pid and exit."""
    signal.signal(signal.SIGCHLD, signal.SIG_DFL)
    with conn, conn.makefile("rwb", buffering=0) as stream:
        request = json.loads(stream.readline())
        pid = os.fork()
        if pid == 0:
            conn.close()
            _run_command(request)
        stream.write(f"pid {pid}\n".encode())
        _, status = os.waitpid(pid, 0)
        stream.write(f"exit {os.waitstatus_to_exitcode(status)}\n".encode())
    os._exit(0)


def main(address: str) -> None:
    _preload()
    gc.freeze()  # the children inherit these objects: their collections need not visit them
    signal.signal(signal.SIGCHLD, signal.SIG_IGN)  # the children reap themselves
    listener = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
    listener.bind(address)
    listener.listen(64)
    print("ready", flush=True)
    events = selectors.DefaultSelector()
    events.register(listener, selectors.EVENT_READ)
    events.register(sys.stdin, selectors.EVENT_READ)
    while True:
        for key, _ in events.select():
            if key.fileobj is sys.stdin:
                if not sys.stdin.buffer.read1(4096):
                    return  # the tests are over
                continue
            conn, _ = listener.accept()
            if os.fork() == 0:
                listener.close()
                _serve_one(conn)
            conn.close()


if __name__ == "__main__":
    main(sys.argv[1])
