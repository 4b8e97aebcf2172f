"""Job files: TOML whose keys are command-line option names, read the same way everywhere.

``curvefit measure --config`` and ``curvefit track --config`` read their job files here,
so a job runs the same from any working directory: relative paths are resolved against
the file's own folder (what a nightly CI job needs).
"""

from __future__ import annotations

import tomllib
from pathlib import Path

from curvefit.core.errors import InputError

# Keys whose values are paths, resolved against the job file's folder.
PATH_KEYS = ("data", "test", "store", "out")


def read_toml(path: str | Path, what: str = "config file") -> dict:
    """Read a TOML job/config file; a missing or malformed file is an `InputError`.

    Examples
    --------
    >>> import tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "job.toml")
    >>> _ = open(p, "w").write('series = "nightly"\\nrepeats = 3\\n')
    >>> read_toml(p)
    {'series': 'nightly', 'repeats': 3}
    """
    p = Path(path)
    if not p.is_file():
        raise InputError(f"{what} not found: {p}")
    try:
        with open(p, "rb") as fh:
            return tomllib.load(fh)
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise InputError(f"{p} is not valid TOML: {' '.join(str(exc).split())}") from None


def resolve_job_paths(job: dict, config_path: str | Path, source: str | None = None) -> dict:
    """Resolve a job file's relative paths against the file's own folder (in place).

    Touches the keys ``data``, ``test``, ``store``, ``out`` and the file part of a
    ``file.py:make_model`` model spec.

    Examples
    --------
    >>> job = resolve_job_paths({"store": "h.db", "model": "m.py:make_model"}, "/jobs/a.toml")
    >>> job["store"], job["model"]
    ('/jobs/h.db', '/jobs/m.py:make_model')
    """
    source = source or str(config_path)
    base = Path(config_path).resolve().parent

    def resolve(text: str) -> str:
        q = Path(text).expanduser()
        return str(q if q.is_absolute() else base / q)

    for k in PATH_KEYS:
        if job.get(k) is not None:
            if not isinstance(job[k], str):
                raise InputError(f"{source}: {k!r} must be a path string, got {job[k]!r}")
            job[k] = resolve(job[k])
    model = job.get("model")
    if isinstance(model, str) and ".py:" in model:
        file_part, _, attr = model.rpartition(":")
        job["model"] = f"{resolve(file_part)}:{attr}"
    return job
