"""The README and docs name only commands and options that exist.

Every ``curvefit <command> ...`` line of README.md and docs/*.md (``$`` examples, usage
synopses and inline code) is checked against that command's real ``--help``, and every
other ``--option`` the docs name in code must belong to some command. The help of each
command is read once, in one subprocess, so the whole file takes a few seconds. The
pasted outputs themselves are refreshed and compared by ``scripts/refresh_docs.py``.
"""

import json
import os
import re
import subprocess
import sys
from functools import lru_cache

import pytest

from conftest import ROOT
from curvefit.cli import COMMANDS

DOCS = [ROOT / "README.md", *sorted((ROOT / "docs").glob("*.md"))]
OPTION = re.compile(r"(?<![\w-])--[a-z][a-z0-9-]*")
HELP_OPTION = re.compile(r"^[│|]?\s*(?:\*\s+)?(--[a-z][a-z0-9-]*)")
COMMAND_LINE = re.compile(r"^(?:\$ )?curvefit ([a-z][a-z-]*)(?=\s|$)(.*)$")
FENCE = re.compile(r"^\s*(`{3,}|~{3,})(.*)$")
INLINE = re.compile(r"(?<!`)`([^`\n]+)`(?!`)")
QUOTED = re.compile(r"\"[^\"]*\"|'[^']*'")
# Options of the benchmark scripts (named by path or by file name, `bench_forecast.py
# --simulate`) and of other programs named in the docs.
NOT_CURVEFIT = re.compile(r"scripts/|\w\.py\b(?!:)|pytest|pip |ruff |python -c")  # not a model file.py:name
# Options of examples/trainer.py (docs/capacity.md), of scripts named in the sentence
# around them (--replan: scripts/bench_plans.py; --fit-drop: scripts/calibrate_forecasts.py),
# and curvefit's own --help/--version.
NOT_CHECKED = {"--k", "--replan", "--fit-drop", "--help", "--version"}

HELP_SCRIPT = """
import contextlib, io, json, sys
from curvefit.cli.main import main
helps = {}
for args in json.loads(sys.argv[1]):
    out = io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(io.StringIO()):
        try:
            main(args + ["--help"])
        except SystemExit:
            pass
    helps[" ".join(args)] = out.getvalue()
print(json.dumps(helps))
"""


def help_options(text: str) -> set[str]:
    return {m.group(1) for line in text.splitlines() if (m := HELP_OPTION.match(line))}


@lru_cache(maxsize=None)
def helps() -> dict[str, str]:
    """`curvefit <cmd> --help` for every command and every `bound` calculator."""
    def run(arg_lists):
        env = dict(os.environ, COLUMNS="200", NO_COLOR="1")
        done = subprocess.run([sys.executable, "-c", HELP_SCRIPT, json.dumps(arg_lists)],
                              capture_output=True, text=True, cwd=ROOT, env=env, timeout=120)
        assert done.returncode == 0, done.stderr
        return json.loads(done.stdout)

    found = run([[]] + [[c] for c in COMMANDS])   # "" is `curvefit --help`: the root options
    found.update(run([["bound", sub] for sub in bound_calculators(found["bound"])]))
    return found


def bound_calculators(bound_help: str) -> list[str]:
    """The calculators listed under Commands in `curvefit bound --help`."""
    names, in_commands = [], False
    for line in bound_help.splitlines():
        if "Commands" in line:
            in_commands = True
        elif in_commands and (m := re.match(r"^[│|]?\s+([a-z][a-z-]+)\s{2,}", line)):
            names.append(m.group(1))
    return names


def command_lines(text: str):
    """(line number, command, rest) of each curvefit command line written in the doc."""
    lines = text.splitlines()
    in_fence, file_block = False, False
    for i, line in enumerate(lines):
        fence = FENCE.match(line)
        if fence:
            in_fence = not in_fence
            file_block = in_fence and "file=" in fence.group(2)
            continue
        if in_fence and not file_block:
            m = COMMAND_LINE.match(line.strip())
            if not m:
                continue
            rest, j = m.group(2), i
            # `$` examples continue after a trailing backslash, synopses on indented lines
            while j + 1 < len(lines) and (rest.endswith("\\") or (
                    not line.startswith("$") and lines[j + 1].startswith(" ") and
                    lines[j + 1].strip().startswith("["))):
                j += 1
                rest = rest.rstrip("\\") + " " + lines[j].strip()
            yield i + 1, m.group(1), rest
        elif not in_fence:
            for span in INLINE.findall(line):
                m = COMMAND_LINE.match(span.strip())
                if m:
                    yield i + 1, m.group(1), m.group(2)


def named_options(rest: str) -> set[str]:
    rest = QUOTED.sub("", rest.split("  #")[0])
    return set(OPTION.findall(rest))


def documented_commands(docs=DOCS):
    for doc in docs:
        text = doc if isinstance(doc, str) else doc.read_text(encoding="utf-8")
        name = "<text>" if isinstance(doc, str) else doc.relative_to(ROOT)
        for line, command, rest in command_lines(text):
            yield f"{name}:{line}", command, rest


def wrong_options(docs=DOCS) -> list[str]:
    """Options of documented command lines that their command's --help does not list."""
    known = helps()
    calculators = bound_calculators(known["bound"])
    assert calculators, "no calculators found in `curvefit bound --help`"
    wrong = []
    for where, command, rest in documented_commands(docs):
        if command not in COMMANDS:
            continue                                    # reported on its own
        words = rest.split()
        if command == "bound":
            subs = [words[0]] if words and words[0] in calculators else calculators
            if words and not words[0].startswith("-") and not set(words[0].split("|")) <= set(calculators):
                wrong.append(f"{where}: curvefit bound {words[0]} (no such calculator)")
            options = set().union(*(help_options(known[f"bound {s}"]) for s in subs))
        else:
            options = help_options(known[command])
        options |= help_options(known[""])             # --no-warnings goes anywhere
        wrong += [f"{where}: curvefit {command} {opt}"
                  for opt in sorted(named_options(rest) - options - {"--help"})]
    return wrong


def stray_options(text: str) -> list[str]:
    """Options named in code (fenced blocks, inline code) that no command has."""
    everything = set().union(*(help_options(help_text) for help_text in helps().values()))
    wrong = []
    in_fence, file_block = False, False
    for i, line in enumerate(text.splitlines()):
        fence = FENCE.match(line)
        if fence:
            in_fence = not in_fence
            file_block = in_fence and "file=" in fence.group(2)
            continue
        pieces = [line] if in_fence and not file_block else INLINE.findall(line)
        for piece in pieces:
            if NOT_CURVEFIT.search(piece):
                continue
            wrong += [f"{i + 1}: {opt}"
                      for opt in sorted(named_options(piece) - everything - NOT_CHECKED)]
    return wrong


def test_the_docs_show_commands_at_all():
    found = list(documented_commands())
    assert len(found) > 40
    assert {command for _, command, _ in found} >= {"measure", "fit", "need", "bound", "demo"}


def test_every_documented_command_exists():
    unknown = [f"{where}: curvefit {command}" for where, command, _ in documented_commands()
               if command not in COMMANDS]
    assert not unknown, "commands the CLI does not have:\n" + "\n".join(unknown)


def test_every_option_of_a_documented_command_line_exists():
    wrong = wrong_options()
    assert not wrong, "options missing from `--help` of their command:\n" + "\n".join(wrong)


def test_every_option_named_in_docs_code_belongs_to_some_command():
    wrong = [f"{doc.relative_to(ROOT)}:{w}" for doc in DOCS
             for w in stray_options(doc.read_text(encoding="utf-8"))]
    assert not wrong, "options no curvefit command has:\n" + "\n".join(wrong)


def test_a_renamed_option_is_caught():
    doc = ("```\n$ curvefit fit run.json --level 0.9\n$ curvefit bound samples --eps 0.1 --n-test 5\n```\n"
           "Options: `--level 0.9`, `--interval 0.9`; `curvefit need RUN --gap G --weights none`.\n")
    assert wrong_options([doc]) == ["<text>:2: curvefit fit --level",
                                    "<text>:3: curvefit bound --n-test"]
    assert stray_options(doc) == ["2: --level", "5: --level"]


@pytest.mark.parametrize("text, expected", [
    ("```\n$ curvefit fit run.json --interval 0.8\n```", [("fit", " run.json --interval 0.8")]),
    ("$ curvefit fit run.json, outside code", []),
    ("x `curvefit need RUN --gap G` y", [("need", " RUN --gap G")]),
    ("```\n$ curvefit measure a.csv \\\n    --target y\n```", [("measure", " a.csv  --target y")]),
    ("```\ncurvefit demo: output line, not a command\n```", []),
])
def test_command_lines_are_found(text, expected):
    assert [(c, r) for _, c, r in command_lines(text)] == expected


def test_quoted_trainer_commands_are_not_read_as_options():
    assert named_options(' x --command "prog --out={predictions}" --timeout 3  # --no') == {
        "--command", "--timeout"}


def python_sessions():
    """(doc, line, text) of each ```python block of the docs written as a `>>>` session."""
    for doc in DOCS:
        lines = doc.read_text(encoding="utf-8").splitlines()
        start = None
        for i, line in enumerate(lines):
            fence = FENCE.match(line)
            if fence and start is None:
                start = i if fence.group(2).strip().startswith("python") else -1
            elif fence:
                body = "\n".join(lines[start + 1:i]) if start >= 0 else ""
                if ">>>" in body:
                    yield pytest.param(body, id=f"{doc.name}:{start + 1}")
                start = None


@pytest.mark.parametrize("session", list(python_sessions()))
def test_python_sessions_in_the_docs_print_what_they_show(session, monkeypatch):
    import doctest

    import numpy as np

    monkeypatch.chdir(ROOT)                      # the sessions read datasets_demo/ relatively
    failures: list[str] = []
    test = doctest.DocTestParser().get_doctest(session, {}, "docs", "docs", 0)
    runner = doctest.DocTestRunner(optionflags=doctest.NORMALIZE_WHITESPACE)
    legacy = "1.25" if np.lib.NumpyVersion(np.__version__) >= "2.0.0" else False
    with np.printoptions(legacy=legacy):         # docs show 0.04295, not np.float64(0.04295)
        runner.run(test, out=lambda text: failures.append(text))
    assert not failures, "".join(failures)


DOTTED = re.compile(r"\bcurvefit(?:\.[A-Za-z_]\w*)+(?![\w/])")
FROM_IMPORT = re.compile(r"^\s*(?:>>> )?from (curvefit[\w.]*) import ([\w, ]+?)(?:\s+#.*)?$")


def resolve(dotted: str):
    """The object a dotted ``curvefit...`` name names (module, then attributes)."""
    import importlib

    parts = dotted.split(".")
    for cut in range(len(parts), 0, -1):
        try:
            obj = importlib.import_module(".".join(parts[:cut]))
        except ModuleNotFoundError:
            continue
        for name in parts[cut:]:
            obj = getattr(obj, name)
        return obj
    raise ModuleNotFoundError(dotted)


def test_module_and_function_paths_named_in_the_docs_exist():
    missing = []
    for doc in DOCS:
        for i, line in enumerate(doc.read_text(encoding="utf-8").splitlines()):
            names = DOTTED.findall(line)
            m = FROM_IMPORT.match(line)
            if m:
                names += [f"{m.group(1)}.{n.split(' as ')[0].strip()}" for n in m.group(2).split(",")]
            for name in names:
                try:
                    resolve(name)
                except (ImportError, AttributeError) as exc:
                    missing.append(f"{doc.relative_to(ROOT)}:{i + 1}: {name} ({type(exc).__name__})")
    assert not missing, "names in the docs that do not exist:\n" + "\n".join(missing)


def test_a_moved_function_is_caught():
    assert resolve("curvefit.workflows.analysis.analyse")
    with pytest.raises(AttributeError):
        resolve("curvefit.report.html.analyse")       # where it lived before the parts
    assert DOTTED.findall("tag `curvefit.run/1`, module curvefit.fitting.engine.") == [
        "curvefit.fitting.engine"]


@lru_cache(maxsize=None)
def refresh_docs_module():
    """scripts/refresh_docs.py as a module (registered first: its dataclasses need it)."""
    import importlib.util

    spec = importlib.util.spec_from_file_location("refresh_docs", ROOT / "scripts" / "refresh_docs.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


GUIDE = """\
Intro.

```text file=input.txt
one
two
```
<!-- refresh-docs: printf 'x\\n' > made.txt -->
```
$ wc -l < input.txt
99
$ cat made.txt \\
    input.txt
old output
```

```
$ false
$ echo $?
0
```

```
$ .venv/bin/python scripts/bench_fit.py
measured on purpose: left alone
```
"""


def test_refresh_docs_reruns_the_examples_in_document_order(tmp_path):
    import shutil
    import tempfile

    rd = refresh_docs_module()
    doc = tmp_path / "guide.md"
    doc.write_text(GUIDE, encoding="utf-8")
    workspace = rd.Workspace(str(ROOT), timeout=60)
    try:
        lines, results = rd.run_document(doc, workspace, log=lambda message: None)
    finally:
        shutil.rmtree(workspace.path)
    text = "\n".join(lines) + "\n"
    if len(str(ROOT)) >= len(tempfile.gettempdir()) + 5:   # room for a same-width scratch path
        assert len(str(workspace.path)) == len(str(ROOT))  # paths shown in its place keep their width
    assert "$ wc -l < input.txt\n2\n$ cat made.txt \\\n    input.txt\nx\none\ntwo\n```" in text
    assert "$ false\n$ echo $?\n1\n```" in text
    assert "measured on purpose: left alone" in text
    assert [r.line for r in results] == [8, 16]          # opening fences of the two examples
    assert not any(r.warnings for r in results)
    found = [line for line in rd.differences(results) if not line.startswith(" ")]
    assert [line.split("guide.md:")[1][:20] for line in found] == ["8: text differs: wc ",
                                                                   "16: numbers differ: "]


def test_refresh_docs_check_ignores_what_varies_between_runs():
    rd = refresh_docs_module()
    old = ["  done in 4 s -> curvefit-demo/run.json",
           "1    2026-12-02 04:18  /work/main/examples/model.py:make_model  0.2814  898224ce"]
    new = ["  done in 17 s -> curvefit-demo/run.json",
           "1  2026-12-03 11:02  /tmp/abcdefghi/examples/model.py:make_model  0.2814  1ca2ebb0"]
    assert rd.masked(old) == rd.masked(new)
    assert rd.masked(["0.2814"]) != rd.masked(["0.2815"])
    assert rd.masked(["0.2814"], numbers=True) == rd.masked(["0.2815"], numbers=True)


def test_shape_comparison_catches_a_new_column_a_lost_line_and_a_renamed_key():
    rd = refresh_docs_module()

    def result(old, new):
        return rd.Result("guide.md", 1, ["$ cmd", *old], ["$ cmd", *new], [])

    same = result(["size  test", "  100  12.5%", "chosen: power-law"],
                  ["size  test", "  200   9.1%", "chosen: exp-decay"])
    assert rd.shape_differences([same]) == []           # numbers and names may change
    wider = result(["size  test", "  100  12.5%"], ["size  test  train", "  100  12.5%  3.0%"])
    shorter = result(["size  test", "  100  12.5%", "wrote run.json"], ["size  test", "  100  12.5%"])
    renamed = result(['{"n_samples": 10, "low": 0.1}'], ['{"samples": 10, "low": 0.1}'])
    relabelled = result(["chosen: power-law"], ["picked: power-law"])
    for case in (wider, shorter, renamed, relabelled):
        assert rd.shape_differences([case]), case.new


# Documents whose examples run in about a minute on the 2-core machine run in every
# suite (docs/bounds.md also covers the output of measure); the others (the demo,
# 12,000-row measurements, probes, the nightly job: 10-20 minutes together) only with
# CURVEFIT_DOCS_EXAMPLES=all (DEVELOPERS.md, "Documentation examples").
SLOW_DOCS = {"README.md", "docs/report.md", "docs/fitting.md", "docs/capacity.md", "docs/history.md",
             "docs/measure.md", "docs/plans.md"}


def example_documents():
    rd = refresh_docs_module()
    for doc in rd.documents([]):
        name = rd.label(doc)
        marks = [pytest.mark.slow] if name in SLOW_DOCS else []
        yield pytest.param(doc, id=name, marks=marks)


def run_examples(doc):
    """The examples of one document, run in their own scratch folder: its Results."""
    import shutil

    rd = refresh_docs_module()
    workspace = rd.Workspace(rd.shown_as(doc.read_text(encoding="utf-8")), timeout=900)
    try:
        return rd.run_document(doc, workspace, log=lambda message: None)[1]
    finally:
        shutil.rmtree(workspace.path, ignore_errors=True)


@pytest.fixture(scope="module")
def example_runs():
    """Every selected document's examples, two documents at a time (each document's
    commands run in order; documents are independent), so the two cores both work."""
    from concurrent.futures import ThreadPoolExecutor

    rd = refresh_docs_module()
    everything = os.environ.get("CURVEFIT_DOCS_EXAMPLES") == "all"
    docs = [d for d in rd.documents([]) if everything or rd.label(d) not in SLOW_DOCS]
    with ThreadPoolExecutor(max_workers=2) as pool:
        futures = {rd.label(d): pool.submit(run_examples, d) for d in docs}
    return futures


@pytest.mark.parametrize("doc", list(example_documents()))
def test_every_example_prints_what_the_docs_show(doc, example_runs):
    """Each `$ curvefit ...` example, run in document order in a scratch folder, prints
    output of the shape the document shows: the same lines, columns, labels and JSON keys
    (numbers may differ). `scripts/refresh_docs.py` pastes fresh outputs when this fails."""
    rd = refresh_docs_module()
    name = rd.label(doc)
    if name not in example_runs:
        pytest.skip(f"{name}: slow examples run with CURVEFIT_DOCS_EXAMPLES=all")
    results = example_runs[name].result()
    assert results, f"{name} has no examples"
    problems = [w for r in results for w in r.warnings] + rd.shape_differences(results)
    assert not problems, ("examples whose output drifted from the document (refresh with "
                          f"scripts/refresh_docs.py {name}):\n" + "\n".join(problems))
