"""Model specifications: what to train in each cell, and how to rebuild it in a worker.

A model can be named three ways on the command line (and as a string in the API):

``package.module:Name``
    A class or factory importable from an installed package, called with the
    ``--param KEY=VALUE`` parameters, e.g. ``sklearn.linear_model:LogisticRegression``.
``path/to/file.py:make_model``
    A function defined in a Python file, called with the parameters. The file is
    loaded by path (its folder is on ``sys.path`` while it loads, so helpers beside it
    can be imported).
``--command "trainer {train} {test} {predictions}"``
    Any program, in any language. See `CommandModel` for the file layout.

From Python, a ready estimator or a zero-argument factory also works. `as_model_spec` is
the one place where anything a caller may pass as a model becomes a `ModelSpec`: the
runner, the trade-off sweep and the capacity probe all call it.

A `ModelSpec` stores only strings, parameters and (for the Python API) an unfitted
estimator, so it pickles to loky or Dask workers; ``make()`` returns a fresh unfitted
estimator on every call. Specs are validated eagerly by `resolve_model`, in the parent
process, so a typo fails before any work starts.
"""

from __future__ import annotations

import ast
import atexit
import contextlib
import dataclasses
import hashlib
import importlib
import importlib.util
import inspect
import json
import math
import os
import secrets
import shlex
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator, clone

from curvefit.core.errors import InputError
from curvefit.core.jsonio import jsonable
from curvefit.core.validate import check_choice, check_positive

PLACEHOLDERS = ("{train}", "{test}", "{predictions}")
# how a trainer program receives its rows: CSV text, a Parquet file, or NumPy's .npz
TRAINER_FORMATS = ("csv", "parquet", "npz")
ENCODE_CHOICES = ("auto", "none")
TARGET_COLUMN = "target"


# ---------------------------------------------------------------------- parameters
def parse_params(items) -> dict:
    """Parse ``KEY=VALUE`` strings into a dict; values are Python literals when possible.

    A value that is not a literal (a bare word such as ``lbfgs``) is kept as a string.

    Examples
    --------
    >>> parse_params(["C=0.5", "solver=lbfgs", "max_iter=200", "class_weight=None",
    ...               "hidden=(10, 5)"])
    {'C': 0.5, 'solver': 'lbfgs', 'max_iter': 200, 'class_weight': None, 'hidden': (10, 5)}
    """
    params: dict = {}
    for item in items or ():
        text = str(item)
        key, sep, raw = text.partition("=")
        key = key.strip()
        if not sep or not key:
            raise InputError(f"malformed --param {text!r}; use KEY=VALUE")
        if not key.isidentifier():
            raise InputError(f"malformed --param {text!r}: {key!r} is not a parameter name; use KEY=VALUE")
        if key in params:
            raise InputError(f"--param {key!r} is given twice; give each parameter once")
        raw = raw.strip()
        try:
            value = ast.literal_eval(raw)
        except (ValueError, SyntaxError, TypeError, MemoryError, RecursionError):
            value = raw
        params[key] = value
    return params


# ---------------------------------------------------------------------- loading
_MODULE_FILE_CACHE: dict[str, Any] = {}
_LOAD_LOCK = threading.RLock()  # re-entrant: a model file may resolve another


def _load_file_module(path: str):
    """Import a Python file by path, once per process (cached by absolute path)."""
    path = os.path.abspath(path)
    with _LOAD_LOCK:
        mod = _MODULE_FILE_CACHE.get(path)
        if mod is not None:
            return mod
        name = "curvefit_user_" + hashlib.sha1(path.encode()).hexdigest()[:12]
        spec = importlib.util.spec_from_file_location(name, path)
        if spec is None or spec.loader is None:
            raise ImportError(f"cannot load {path} as Python")
        mod = importlib.util.module_from_spec(spec)
        # registered so classes defined in the file can be pickled and deep-copied
        sys.modules[name] = mod
        folder = os.path.dirname(path)
        sys.path.insert(0, folder)
        try:
            spec.loader.exec_module(mod)
        except BaseException:
            sys.modules.pop(name, None)
            raise
        finally:
            try:
                sys.path.remove(folder)
            except ValueError:
                pass
        _MODULE_FILE_CACHE[path] = mod
        return mod


def _load_attribute(kind: str, target: str, attr: str):
    module = _load_file_module(target) if kind == "file" else importlib.import_module(target)
    obj = module
    for part in attr.split("."):
        obj = getattr(obj, part)
    return obj


def _is_estimator(obj) -> bool:
    return callable(getattr(obj, "fit", None)) and callable(getattr(obj, "predict", None))


def _build(obj, params: dict):
    """Call a class/factory with params, or clone a ready estimator and set params."""
    if _is_estimator(obj) and not inspect.isclass(obj):
        est = clone(obj, safe=False)
        if params:
            est.set_params(**params)
        return est
    return obj(**params)


def _estimator_label(est) -> str:
    steps = getattr(est, "steps", None)
    if isinstance(steps, list) and steps:
        return "+".join(type(s[1]).__name__ for s in steps if s[1] not in (None, "passthrough"))
    return type(est).__name__


# ---------------------------------------------------------------------- spec
@dataclass(frozen=True, eq=False)
class ModelSpec:
    """A picklable recipe for a fresh, unfitted estimator.

    Attributes
    ----------
    kind : {"import", "file", "command", "object", "factory"}
    spec : str
        The spec as given, canonicalised (``module:Name``, absolute ``file.py:func``,
        or the command line).
    params : dict
        Keyword arguments for the class or factory (import and file kinds).
    command : str or None
        The command line of a command trainer.
    timeout : float or None
        Seconds allowed per run of a command trainer.
    name : str
        Short label, e.g. ``"LogisticRegression"``.
    """

    kind: str
    spec: str
    params: dict = field(default_factory=dict)
    command: str | None = None
    timeout: float | None = None
    name: str = ""
    estimator: Any = None          # "object" kind: an unfitted copy of the user's estimator
    factory: Callable | None = None  # "factory" kind: zero-argument callable
    trainer_format: str = "csv"     # "command" kind: the files the program reads

    def _target(self) -> tuple[str, str]:
        target, _, attr = self.spec.rpartition(":")
        return target, attr

    def make(self):
        """A fresh, unfitted estimator (a new object on every call)."""
        if self.kind == "command":
            return CommandModel(self.command, timeout=self.timeout, file_format=self.trainer_format)
        if self.kind == "object":
            return clone(self.estimator, safe=False)
        if self.kind == "factory":
            return self.factory()
        target, attr = self._target()
        return _build(_load_attribute(self.kind, target, attr), dict(self.params))

    def with_params(self, **params) -> "ModelSpec":
        """The same spec with some parameters replaced (used to vary a complexity knob)."""
        if self.kind in ("command", "factory"):
            raise InputError(f"cannot set parameters {', '.join(params)} on a {self.kind} model")
        merged = {**self.params, **params}
        if self.kind == "object":
            est = clone(self.estimator, safe=False)
            try:
                est.set_params(**params)
            except (ValueError, TypeError) as exc:
                raise InputError(f"model {self.name} does not accept {', '.join(params)}: "
                                 f"{_one_line(exc)}") from None
            return ModelSpec("object", self.spec, merged, name=self.name, estimator=est)
        return resolve_model(self.spec, merged)

    def describe(self) -> dict:
        """Plain-JSON description for run metadata."""
        d = {"kind": self.kind, "spec": self.spec, "name": self.name,
             "params": {k: _plain(v) for k, v in self.params.items()},
             "command": self.command, "timeout": self.timeout}
        if self.kind == "object":
            d["estimator"] = repr(self.estimator)
            d["params"] = {k: _plain(v) for k, v in _safe_params(self.estimator).items()}
        if self.kind == "factory":
            d["factory"] = _qualname(self.factory)
        if self.trainer_format != "csv":  # absent for CSV: older journals still resume
            d["trainer_format"] = self.trainer_format
        return d

    def __repr__(self) -> str:
        return f"ModelSpec({self.kind}: {self.spec}{' ' + repr(self.params) if self.params else ''})"


def _plain(v):
    """A JSON value for a parameter value: numbers and containers as `jsonable` makes
    them, anything else (an estimator, a function, infinity) as its repr."""
    if isinstance(v, (float, np.floating)) and not math.isfinite(v):
        return repr(float(v))  # JSON has no infinity, and None would read as "unset"
    v = jsonable(v)
    if v is None or isinstance(v, (bool, int, float, str)):
        return v
    if isinstance(v, list):
        return [_plain(x) for x in v]
    if isinstance(v, dict):
        return {k: _plain(x) for k, x in v.items()}
    return repr(v)


def _safe_params(est) -> dict:
    try:
        return dict(est.get_params(deep=False))
    except Exception:
        return {}


def _qualname(fn) -> str:
    return f"{getattr(fn, '__module__', '?')}.{getattr(fn, '__qualname__', repr(fn))}"


def _one_line(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    return f"{type(exc).__name__}: {text}"[:300] if text else type(exc).__name__


def _check_params(est, spec: str) -> None:
    """Eager check of parameter values for scikit-learn estimators (constraints table)."""
    validate = getattr(est, "_validate_params", None)
    if callable(validate):
        try:
            validate()
        except (ValueError, TypeError) as exc:
            raise InputError(f"bad --param for model spec {spec!r}: {' '.join(str(exc).split())}") from None


def resolve_model(spec: str | None, params: dict | None = None, *, command: str | None = None,
                  timeout: float | None = None, trainer_format: str = "csv") -> ModelSpec:
    """Turn a model spec (or a trainer command) into a validated `ModelSpec`.

    Parameters
    ----------
    spec : str or None
        ``package.module:Name`` or ``path/to/file.py:function`` (a dotted
        ``package.module.Name`` is also accepted). ``None`` when ``command`` is given.
    params : dict, optional
        Keyword arguments for the class or function (from `parse_params`).
    command : str, optional
        A trainer command line with the placeholders ``{train}``, ``{test}`` and
        ``{predictions}``; split with `shlex`, run without a shell.
    timeout : float, optional
        Seconds allowed per run of the trainer command.
    trainer_format : {"csv", "parquet", "npz"}
        The files a trainer command receives (see `CommandModel`).

    Raises
    ------
    InputError
        Not importable, not an estimator, a parameter it does not accept, a command
        missing a placeholder or naming a program that does not exist.

    Examples
    --------
    >>> m = resolve_model("sklearn.linear_model:LogisticRegression", {"C": 0.5})
    >>> m.name, m.make().C
    ('LogisticRegression', 0.5)
    """
    params = dict(params or {})
    if timeout is not None:
        timeout = check_positive(timeout, "timeout")
    check_choice(trainer_format, "trainer format", TRAINER_FORMATS)
    if trainer_format != "csv" and command is None:
        raise InputError("--trainer-format applies to --command only")
    if command is not None:
        if spec:
            raise InputError("give either --model or --command, not both")
        if params:
            raise InputError("--param does not apply to --command; put the trainer's options in the command")
        argv = check_command(command)
        return ModelSpec("command", str(command), {}, command=str(command), timeout=timeout,
                         name=_command_label(argv), trainer_format=trainer_format)
    if spec is None or not str(spec).strip():
        raise InputError("no model given; use --model package.module:Name, "
                         "--model path/to/file.py:make_model, or "
                         "--command \"trainer {train} {test} {predictions}\"")
    spec = str(spec).strip()
    if ":" in spec:
        target, _, attr = spec.rpartition(":")
    elif spec.endswith(".py"):
        raise InputError(f"model spec {spec!r} names a file but no function; use {spec}:make_model")
    elif "." in spec:
        target, _, attr = spec.rpartition(".")
    else:
        raise InputError(f"model spec {spec!r} is not importable: use package.module:Name, "
                         "e.g. sklearn.linear_model:LogisticRegression")
    target, attr = target.strip(), attr.strip()
    if not target or not attr:
        raise InputError(f"model spec {spec!r} is not importable: use package.module:Name "
                         "or file.py:make_model")
    is_file = target.endswith(".py") or os.sep in target or "/" in target
    if is_file:
        path = Path(target).expanduser()
        if not path.is_file():
            raise InputError(f"model file not found: {target} (from model spec {spec!r}); check the path")
        kind, target = "file", str(path.resolve())
    else:
        kind = "import"
    canonical = f"{target}:{attr}"
    try:
        obj = _load_attribute(kind, target, attr)
    except InputError:
        raise
    except (Exception, SystemExit) as exc:  # user code may raise anything while importing
        raise InputError(f"model spec {spec!r} is not importable: {_one_line(exc)}") from None
    if not callable(obj) and not _is_estimator(obj):
        raise InputError(f"model spec {spec!r} is not an estimator (no fit/predict): "
                         f"it is a {type(obj).__name__}")
    try:
        est = _build(obj, params)
    except TypeError as exc:
        if not params:
            raise InputError(f"model spec {spec!r} cannot be called without parameters: "
                             f"{' '.join(str(exc).split())}; pass them with --param KEY=VALUE") from None
        raise InputError(f"model spec {spec!r} does not accept these parameters "
                         f"({', '.join(params) or 'none'}): {' '.join(str(exc).split())}") from None
    except (ValueError, AttributeError) as exc:
        raise InputError(f"bad --param for model spec {spec!r}: {' '.join(str(exc).split())}") from None
    except (Exception, SystemExit) as exc:  # `sys:exit` must not end the command with its code
        raise InputError(f"model spec {spec!r} failed when called: {_one_line(exc)}") from None
    if not _is_estimator(est):
        raise InputError(f"model spec {spec!r} is not an estimator (no fit/predict): "
                         f"calling it gave a {type(est).__name__}")
    _check_params(est, spec)
    name = attr.split(".")[-1] if kind == "import" and inspect.isclass(obj) else _estimator_label(est)
    return ModelSpec(kind, canonical, params, timeout=timeout, name=name)


def as_model_spec(model, params: dict | None = None, *, timeout: float | None = None) -> ModelSpec:
    """Accept what a Python caller may pass as a model and return a `ModelSpec`.

    Parameters
    ----------
    model : ModelSpec, str, estimator, or callable
        A `ModelSpec` (returned as is; a command spec without a timeout takes
        ``timeout``), a spec string (see `resolve_model`; a string holding the
        ``{train}``/``{test}``/``{predictions}`` placeholders is a trainer command), an
        estimator instance (an unfitted clone is stored and cloned again for every
        ``make()``, so the caller's object is never touched), or a zero-argument
        factory returning an estimator.
    params : dict, optional
        Keyword arguments for a spec string, a class or a factory.
    timeout : float, optional
        Seconds allowed per run of a trainer command.

    Raises
    ------
    InputError
        No model (None), or one that is not an estimator, cannot be copied or fails
        when built.

    Examples
    --------
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> user = DecisionTreeClassifier(max_depth=3)
    >>> m = as_model_spec(user)
    >>> m.make() is user, m.make().max_depth
    (False, 3)
    """
    if model is None:
        raise InputError("no model given; pass an estimator, a factory or a model spec")
    if isinstance(model, ModelSpec):
        if model.kind == "command" and timeout is not None and model.timeout is None:
            return dataclasses.replace(model, timeout=float(timeout))
        return model
    if isinstance(model, str):
        if any(p in model for p in PLACEHOLDERS):  # a trainer command line
            return resolve_model(None, params, command=model, timeout=timeout)
        return resolve_model(model, params, timeout=timeout)
    if _is_estimator(model) and not inspect.isclass(model):
        if isinstance(model, CommandModel):
            check_command(model.command)
            return ModelSpec("command", model.command, {}, command=model.command,
                             timeout=model.timeout if timeout is None else timeout,
                             name=_command_label(shlex.split(model.command)))
        try:
            stored = clone(model, safe=False)
        except Exception as exc:
            raise InputError(f"cannot copy the estimator {type(model).__name__}: {_one_line(exc)}") from None
        if params:
            stored.set_params(**params)
        return ModelSpec("object", f"{type(model).__module__}:{type(model).__qualname__}",
                         dict(params or {}), name=_estimator_label(stored), estimator=stored)
    if callable(model):
        try:
            est = model(**(params or {}))
        except Exception as exc:
            raise InputError(f"the model factory {getattr(model, '__name__', model)!r} failed "
                             f"when called: {_one_line(exc)}") from None
        if not _is_estimator(est):
            raise InputError(f"the model factory {getattr(model, '__name__', model)!r} is not an "
                             f"estimator (no fit/predict): it returned a {type(est).__name__}")
        if inspect.isclass(model):
            stored = clone(est, safe=False)
            return ModelSpec("object", f"{model.__module__}:{model.__qualname__}", dict(params or {}),
                             name=model.__name__, estimator=stored)
        if params:
            frozen = dict(params)
            fn = model
            model = _Partial(fn, frozen)
        return ModelSpec("factory", _qualname(model), dict(params or {}),
                         name=_estimator_label(est), factory=model)
    raise InputError(f"model must be an estimator with fit/predict, a zero-argument factory, or a "
                     "spec string like 'sklearn.linear_model:LogisticRegression'; "
                     f"got {type(model).__name__}")


class _Partial:
    """A picklable factory-with-keywords (functools.partial, with a readable name)."""

    def __init__(self, fn, kwargs):
        self.fn, self.kwargs = fn, kwargs
        self.__name__ = getattr(fn, "__name__", "factory")
        self.__qualname__ = getattr(fn, "__qualname__", self.__name__)
        self.__module__ = getattr(fn, "__module__", "?")

    def __call__(self):
        return self.fn(**self.kwargs)


# ---------------------------------------------------------------------- commands
def check_command(command: str) -> list[str]:
    """Split a trainer command and check its placeholders and program; return the argv.

    Examples
    --------
    >>> check_command("python3 train.py {train} {test} {predictions}")[2:]
    ['{train}', '{test}', '{predictions}']
    """
    if not isinstance(command, str) or not command.strip():
        raise InputError("--command is empty; use e.g. "
                         "--command \"python train.py {train} {test} {predictions}\"")
    try:
        argv = shlex.split(command)
    except ValueError as exc:
        raise InputError(f"cannot split --command {command!r}: {exc}; check the quotes") from None
    missing = [p for p in PLACEHOLDERS if not any(p in arg for arg in argv)]
    if missing:
        raise InputError(f"--command is missing the placeholder{'s' if len(missing) > 1 else ''} "
                         f"{', '.join(missing)}; it needs {{train}}, {{test}} and {{predictions}}, "
                         "e.g. \"python train.py {train} {test} {predictions}\"")
    program = argv[0]
    if any(p in program for p in PLACEHOLDERS):
        raise InputError("--command must start with the program to run, not a placeholder")
    if shutil.which(program) is None:
        where = Path(program).expanduser()
        if where.exists() and not os.access(where, os.X_OK):
            raise InputError(f"program {program!r} in --command is not executable; chmod +x it "
                             "or run it through its interpreter")
        raise InputError(f"program {program!r} in --command not found on PATH; give its full path")
    return argv


def _command_label(argv: list[str]) -> str:
    prog = os.path.basename(argv[0])
    # an interpreter followed by a script: the script names the trainer
    if len(argv) > 1 and not argv[1].startswith("-") and not any(p in argv[1] for p in PLACEHOLDERS):
        if prog.startswith(("python", "Rscript", "julia", "node", "ruby", "perl", "bash", "sh", "awk")):
            return f"command:{os.path.basename(argv[1])}"
    return f"command:{prog}"


class CommandError(RuntimeError):
    """A trainer command failed: non-zero exit, timeout, or unusable predictions."""


class CommandTimeout(CommandError, TimeoutError):
    """A trainer command ran longer than its timeout (it was killed)."""


class CommandModel(BaseEstimator):
    """Any program as an estimator: train on files, read one prediction per line.

    ``fit`` only keeps the training rows; ``predict`` writes, into a private temporary
    folder that is removed afterwards,

    * ``train.csv``: header row, the feature columns in order, then the label column
      ``target`` (``target_`` if a feature is already called ``target``);
    * ``test.csv``: header row and the same feature columns, one row per row to predict;

    then runs the command with ``{train}``, ``{test}`` and ``{predictions}`` replaced by
    the three paths (each its own argument; no shell), in the current folder, with
    standard input closed. Both CSV files use commas, ``.`` decimals, double-quote
    quoting where needed (RFC 4180), empty fields for missing values, and no index
    column. The program must write the ``{predictions}`` file: one value per line, one
    line per test row in order; a header line is allowed (a file with exactly one line
    more than there are rows has its first line dropped). Predictions are parsed as
    numbers when every line is a number (and become integers when the training labels
    are integers and every prediction is whole), otherwise kept as text labels; with
    text training labels they stay text.

    A non-zero exit (the message includes the last line of the program's standard
    error), a timeout (the program and its children are killed), a missing predictions
    file or a wrong number of lines raise `CommandError`; the runner records such a
    cell as failed.

    `predict_many` runs the program once for several tables (e.g. the training
    subsample and the test set) by concatenating their rows, and splits the result.

    With ``file_format="parquet"`` the two files are ``train.parquet`` and
    ``test.parquet`` (the same columns, written by pandas through pyarrow, no index);
    with ``"npz"`` they are NumPy archives ``train.npz`` (arrays ``X``, 2-D float64,
    ``y`` and ``feature_names``) and ``test.npz`` (``X`` and ``feature_names``), for
    numeric features only. Large subsamples are read much faster from these than from
    CSV text. The folder (mode 0700, a random name under the temporary folder) holds one
    cell's files and is removed when the program has run.

    Parameters
    ----------
    command : str
        Command line with ``{train}``, ``{test}`` and ``{predictions}``.
    timeout : float, optional
        Seconds allowed per run of the program.
    file_format : {"csv", "parquet", "npz"}
        The files the program receives.

    References
    ----------
    .. [1] Y. Shafranovich, "Common Format and MIME Type for Comma-Separated Values (CSV)
       Files", RFC 4180, IETF, 2005.

    Examples
    --------
    >>> import sys, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "zero.py").write_text(
    ...     "import sys\\nn = sum(1 for _ in open(sys.argv[2])) - 1\\n"
    ...     "open(sys.argv[3], 'w').write('0\\\\n' * n)\\n")
    >>> m = CommandModel(f"{sys.executable} {d / 'zero.py'} {{train}} {{test}} {{predictions}}")
    >>> m.fit([[0.0], [1.0]], [0, 1]).predict([[0.5], [2.0]]).tolist()
    [0, 0]
    """

    def __init__(self, command: str = "", timeout: float | None = None, file_format: str = "csv"):
        self.command = command
        self.timeout = timeout
        self.file_format = file_format

    # -- estimator API
    def fit(self, X, y):
        self.X_train_ = _as_frame(X)
        y = np.asarray(y)
        if y.ndim != 1 or len(y) != len(self.X_train_):
            raise ValueError(f"y must be 1-D with one value per row of X ({len(self.X_train_)} rows)")
        self.y_train_ = y
        if y.dtype.kind in "OUSbi" or y.dtype.kind == "u":
            try:
                self.classes_ = np.unique(y)
            except TypeError:
                pass
        self.n_features_in_ = self.X_train_.shape[1]
        return self

    def predict(self, X):
        return self.predict_many([X])[0]

    def predict_many(self, tables) -> list[np.ndarray]:
        """Predict several tables with one run of the program; one array per table."""
        if not hasattr(self, "X_train_"):
            raise CommandError("CommandModel.predict called before fit")
        frames = [_as_frame(t, like=self.X_train_) for t in tables]
        lengths = [len(f) for f in frames]
        test = pd.concat(frames, ignore_index=True) if len(frames) > 1 else frames[0]
        predictions = self._run(test)
        out, start = [], 0
        for n in lengths:
            out.append(predictions[start:start + n])
            start += n
        return out

    # -- the program run
    def _run(self, test: pd.DataFrame) -> np.ndarray:
        argv_template = check_command(self.command)
        fmt = check_choice(self.file_format, "trainer file format", TRAINER_FORMATS)
        with _trainer_folder() as tmp:
            paths = {"{train}": str(tmp / f"train.{fmt}"), "{test}": str(tmp / f"test.{fmt}"),
                     "{predictions}": str(tmp / "predictions.txt")}
            _write_trainer_files(self.X_train_, self.y_train_, test, paths["{train}"], paths["{test}"], fmt)
            argv = []
            for arg in argv_template:
                for key, value in paths.items():
                    arg = arg.replace(key, value)
                argv.append(arg)
            out_path, err_path = tmp / "stdout.txt", tmp / "stderr.txt"
            with open(out_path, "wb") as fout, open(err_path, "wb") as ferr:
                code = _run_program(argv, fout, ferr, self.timeout, folder=tmp)
            if code != 0:
                last = _last_line(err_path) or _last_line(out_path)
                raise CommandError(f"trainer command exited with code {code}"
                                   + (f": {last}" if last else " (no output on stderr)"))
            pred_path = Path(paths["{predictions}"])
            if not pred_path.is_file():
                raise CommandError("trainer command wrote no predictions file "
                                   "(expected one value per test row in the {predictions} path)")
            text = pred_path.read_text(encoding="utf-8", errors="replace")
        return _parse_predictions(text, len(test), self.y_train_)


def _write_trainer_files(X: pd.DataFrame, y: np.ndarray, test: pd.DataFrame, train_path: str,
                         test_path: str, fmt: str) -> None:
    """The training rows (features, then the label column) and the rows to predict."""
    if fmt == "npz":
        names = np.array([str(c) for c in X.columns])
        try:
            X_train, X_test = X.to_numpy(dtype=float), test.to_numpy(dtype=float)
        except (TypeError, ValueError):
            raise CommandError("npz trainer files hold numeric features only; "
                               "use --trainer-format parquet or csv") from None
        np.savez(train_path, X=X_train, y=np.asarray(y), feature_names=names)
        np.savez(test_path, X=X_test, feature_names=names)
        return
    label = TARGET_COLUMN if TARGET_COLUMN not in X.columns else TARGET_COLUMN + "_"
    train = X.assign(**{label: y})
    if fmt == "parquet":
        train.to_parquet(train_path, index=False)
        test.to_parquet(test_path, index=False)
    else:
        train.to_csv(train_path, index=False)
        test.to_csv(test_path, index=False)


# trainer programs running in this process: process group id -> their temporary folder
_LIVE_TRAINERS: dict[int, Path | None] = {}

# The trainer watch: a small helper process (one per process that starts trainers, in a
# session of its own, its streams on /dev/null) told of each trainer as it starts and
# ends. When the pipe from its owner closes, because the owner exited or was killed
# (`kill -9` of a one-process run, a worker killed by the system), it kills the trainers
# still listed, removes their folders and exits.
_WATCH_CODE = """\
import json, os, shutil, signal, sys, time
live = {}
for line in sys.stdin:
    op, folder, pgid = json.loads(line)
    if op == "+":
        live[folder] = pgid
    else:
        live.pop(folder, None)
for pgid in live.values():
    if pgid:
        try:
            os.killpg(pgid, signal.SIGKILL)
        except OSError:
            pass
for folder, pgid in live.items():
    for _ in range(100 if pgid else 0):  # a dying trainer may still create a file
        try:
            os.killpg(pgid, 0)
        except OSError:
            break
        time.sleep(0.02)
    for _ in range(3):
        shutil.rmtree(folder, ignore_errors=True)
        if not os.path.lexists(folder):
            break
        time.sleep(0.1)
"""
_watch: dict = {}  # {"owner": pid, "proc": Popen} of this process's trainer watch


@contextlib.contextmanager
def _trainer_folder():
    """A private temporary folder (mode 0700), known to the trainer watch from before it
    exists until it is removed: a kill between creating it and telling the watch would
    otherwise leave it behind."""
    base = Path(tempfile.gettempdir())
    while True:
        folder = base / f"curvefit-trainer-{secrets.token_hex(8)}"
        _tell_watch("+", folder, None)
        try:
            folder.mkdir(mode=0o700)
            break
        except FileExistsError:
            _tell_watch("-", folder, None)
        except BaseException:
            _tell_watch("-", folder, None)
            raise
    try:
        yield folder
    finally:
        shutil.rmtree(folder, ignore_errors=True)
        _tell_watch("-", folder, None)


def _tell_watch(op: str, folder: Path | None, pgid: int | None) -> None:
    """Tell the trainer watch (started on first use) of a trainer's folder and process
    group ("+") or that both are gone ("-")."""
    try:
        proc = _watch.get("proc")
        if proc is None or _watch.get("owner") != os.getpid() or proc.poll() is not None:
            if op != "+":
                return
            proc = subprocess.Popen([sys.executable, "-I", "-S", "-c", _WATCH_CODE],
                                    stdin=subprocess.PIPE, stdout=subprocess.DEVNULL,
                                    stderr=subprocess.DEVNULL, start_new_session=True)
            _watch.update(owner=os.getpid(), proc=proc)
            atexit.register(_close_watch, proc)
        proc.stdin.write((json.dumps([op, str(folder), pgid]) + "\n").encode())
        proc.stdin.flush()
    except (OSError, ValueError):
        pass  # best effort: time limits, Ctrl-C and the parallel workers' watch still apply


def _close_watch(proc: subprocess.Popen) -> None:
    """At a normal exit: end the watch (no trainer is left to stop) and reap it."""
    with contextlib.suppress(OSError, ValueError, subprocess.TimeoutExpired):
        proc.stdin.close()
        proc.wait(timeout=5)


def _run_program(argv: list[str], fout, ferr, timeout: float | None, folder: Path | None = None) -> int:
    """Run without a shell in its own process group; kill the whole group on timeout."""
    try:
        proc = subprocess.Popen(argv, stdin=subprocess.DEVNULL, stdout=fout, stderr=ferr,
                                start_new_session=True)
    except OSError as exc:
        raise CommandError(f"cannot start trainer command {argv[0]!r}: {exc.strerror or exc}") from None
    _LIVE_TRAINERS[proc.pid] = folder
    if folder is not None:
        _tell_watch("+", folder, proc.pid)
    try:
        return _wait_then_clear_group(proc, timeout)
    except subprocess.TimeoutExpired:
        _kill_group(proc)
        raise CommandTimeout(f"trainer command timed out after {timeout:g} s (killed)") from None
    except BaseException:
        _kill_group(proc)  # Ctrl-C, SIGTERM or worker shutdown: do not leave the trainer running
        raise
    finally:
        _LIVE_TRAINERS.pop(proc.pid, None)
        if folder is not None:
            _tell_watch("+", folder, None)  # the group is gone; the folder until it is removed


def _wait_then_clear_group(proc: subprocess.Popen, timeout: float | None) -> int:
    """Wait for the trainer to end, then kill whatever is left in its process group (a
    helper it started and did not stop, or one a process-tree kill missed) and reap it.

    The trainer is reaped only after the kill: until then its id, which is the group's,
    cannot be reused, so the kill reaches no one else.
    """
    if not hasattr(os, "waitid"):  # no wait-without-reaping here: reap, then clear
        code = proc.wait(timeout=timeout)
        with contextlib.suppress(OSError):
            os.killpg(proc.pid, signal.SIGKILL)
        return code
    flags = os.WEXITED | os.WNOWAIT
    try:
        if timeout is None:
            os.waitid(os.P_PID, proc.pid, flags)
        else:
            deadline, delay = time.monotonic() + timeout, 0.0005
            while os.waitid(os.P_PID, proc.pid, flags | os.WNOHANG) is None:
                if time.monotonic() > deadline:
                    raise subprocess.TimeoutExpired(proc.args, timeout)
                time.sleep(delay)
                delay = min(2 * delay, 0.01)
    except ChildProcessError:
        pass  # already reaped elsewhere
    with contextlib.suppress(OSError):
        os.killpg(proc.pid, signal.SIGKILL)
    return proc.wait()


def stop_trainers() -> None:
    """Kill every trainer program this process started that still runs (its whole process
    group) and remove its temporary folder.

    For a process that is about to exit without unwinding, such as a parallel worker
    whose run has died (`curvefit.measuring.parallel.tie_to_parent`).
    """
    for pgid, folder in list(_LIVE_TRAINERS.items()):
        with contextlib.suppress(OSError):
            os.killpg(pgid, signal.SIGKILL)
        if folder is not None:
            shutil.rmtree(folder, ignore_errors=True)
        _LIVE_TRAINERS.pop(pgid, None)


def _kill_group(proc: subprocess.Popen) -> None:
    try:
        os.killpg(proc.pid, signal.SIGKILL)
    except (ProcessLookupError, PermissionError, AttributeError, OSError):
        try:
            proc.kill()
        except OSError:
            pass
    try:
        proc.wait(timeout=10)
    except subprocess.TimeoutExpired:
        pass


def _last_line(path: Path) -> str:
    try:
        data = path.read_bytes()[-4000:].decode("utf-8", errors="replace")
    except OSError:
        return ""
    lines = [ln.strip() for ln in data.splitlines() if ln.strip()]
    return lines[-1][:300] if lines else ""


def _parse_predictions(text: str, n_rows: int, y_train: np.ndarray) -> np.ndarray:
    lines = [ln.strip() for ln in text.splitlines()]
    while lines and not lines[-1]:
        lines.pop()
    if len(lines) == n_rows + 1:
        lines = lines[1:]  # a header line
    if len(lines) != n_rows:
        raise CommandError(f"trainer command wrote {len(lines)} predictions for {n_rows} test rows "
                           "(one value per line expected)")
    text_labels = y_train.dtype.kind in "OUS"
    if not text_labels:
        try:
            values = np.array(lines, dtype="float64")
        except ValueError:
            return np.array(lines, dtype=object)
        if y_train.dtype.kind in "biu" and np.all(np.isfinite(values)) and np.all(values == np.round(values)):
            return values.astype(y_train.dtype if y_train.dtype.kind != "b" else "int64")
        return values
    return np.array(lines, dtype=object)


def _as_frame(X, like: pd.DataFrame | None = None) -> pd.DataFrame:
    if isinstance(X, pd.DataFrame):
        return X.reset_index(drop=True)
    arr = np.asarray(X)
    if arr.ndim == 1:
        arr = arr.reshape(-1, 1)
    if like is not None and arr.shape[1] == like.shape[1]:
        return pd.DataFrame(arr, columns=list(like.columns))
    return pd.DataFrame(arr, columns=[f"x{i}" for i in range(arr.shape[1])])


# ---------------------------------------------------------------------- encoding
def _non_numeric_columns(X: pd.DataFrame) -> list:
    return [c for c in X.columns
            if not (pd.api.types.is_numeric_dtype(X[c].dtype) or pd.api.types.is_bool_dtype(X[c].dtype))]


def with_encoding(estimator, X, encode: str = "auto"):
    """Wrap an estimator so that it can read categorical columns and missing values.

    With ``encode="auto"``: categorical (non-numeric) columns get most-frequent
    imputation (if they have gaps) and one-hot encoding that ignores categories unseen
    in training; numeric columns with missing values get median imputation plus
    missing-value indicator columns; the rest pass through. Pass the whole feature
    table as ``X`` so that every column with a gap anywhere gets an imputer. When there
    is nothing to do, the estimator comes back unchanged. With ``encode="none"`` data
    pass through untouched (non-numeric columns are then an error). A `CommandModel`
    is never wrapped: the program reads the raw columns. The estimator itself goes into
    the pipeline (it is not cloned), so pass a fresh one from ``ModelSpec.make()``.

    Returns
    -------
    (estimator, description)
        The (possibly wrapped) estimator and one line saying what was done, for the
        run metadata.

    Examples
    --------
    >>> from sklearn.linear_model import LogisticRegression
    >>> X = pd.DataFrame({"a": [1.0, None, 3.0], "c": ["u", "v", "u"]})
    >>> est, how = with_encoding(LogisticRegression(), X)
    >>> type(est).__name__
    'Pipeline'
    >>> for part in how.split("; "):
    ...     print(part)
    one-hot encoding of 1 categorical column (c)
    median imputation with missing-value indicators for 1 numeric column (a)
    """
    if encode not in ENCODE_CHOICES:
        raise InputError(f"unknown --encode {encode!r}; use auto or none")
    if isinstance(estimator, CommandModel):
        return estimator, "none (the trainer command reads the raw columns)"
    if isinstance(X, pd.DataFrame):
        frame, names = X, [str(c) for c in X.columns]
        col_ref = list(X.columns)
    else:
        arr = np.asarray(X)
        if arr.ndim == 1:
            arr = arr.reshape(-1, 1)
        frame = pd.DataFrame(arr)
        names = [f"x{i}" for i in range(arr.shape[1])]
        col_ref = list(range(arr.shape[1]))  # positional selectors for array input
        if arr.dtype.kind in "biuf":
            frame = frame.astype("float64")
    non_numeric = set(_non_numeric_columns(frame))  # computed once: it scans every column
    categorical = [i for i, c in enumerate(frame.columns) if c in non_numeric]
    if encode == "none":
        if categorical:
            cols = ", ".join(names[i] for i in categorical)
            raise InputError(f"non-numeric feature columns {cols} with --encode none; use --encode auto")
        return estimator, "none (data passed through)"

    from sklearn.compose import ColumnTransformer
    from sklearn.impute import SimpleImputer
    from sklearn.pipeline import Pipeline
    from sklearn.preprocessing import OneHotEncoder

    missing = frame.isna().to_numpy().any(axis=0)
    numeric_gaps = [i for i in range(frame.shape[1]) if i not in categorical and missing[i]]
    if not categorical and not numeric_gaps:
        return estimator, "none needed"
    transformers, parts = [], []
    if categorical:
        onehot = OneHotEncoder(handle_unknown="ignore", sparse_output=False)
        cat_gaps = [i for i in categorical if missing[i]]
        steps = [("onehot", onehot)]
        if cat_gaps:
            steps.insert(0, ("impute", SimpleImputer(strategy="most_frequent")))
        transformers.append(("categorical", Pipeline(steps), [col_ref[i] for i in categorical]))
        part = (f"one-hot encoding of {len(categorical)} categorical "
                f"column{'s' if len(categorical) > 1 else ''} "
                f"({', '.join(names[i] for i in categorical)})")
        if cat_gaps:
            part += f" with most-frequent imputation for {', '.join(names[i] for i in cat_gaps)}"
        parts.append(part)
    if numeric_gaps:
        transformers.append(("numeric_gaps", SimpleImputer(strategy="median", add_indicator=True,
                                                           keep_empty_features=True),
                             [col_ref[i] for i in numeric_gaps]))
        parts.append(f"median imputation with missing-value indicators for {len(numeric_gaps)} numeric "
                     f"column{'s' if len(numeric_gaps) > 1 else ''} "
                     f"({', '.join(names[i] for i in numeric_gaps)})")
    encoder = ColumnTransformer(transformers, remainder="passthrough", sparse_threshold=0.0)
    return Pipeline([("encode", encoder), ("model", estimator)]), "; ".join(parts)
