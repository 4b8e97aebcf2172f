"""Re-run the commands shown in README.md and docs/*.md and paste what they print now.

Usage (from anywhere; paths are found from this file)::

    .venv/bin/python scripts/refresh_docs.py                 # refresh every document
    .venv/bin/python scripts/refresh_docs.py docs/fitting.md # only these documents
    .venv/bin/python scripts/refresh_docs.py --check         # compare only; exit 1 on a difference
    .venv/bin/python scripts/refresh_docs.py --list          # list the blocks it would run

Run it after a change to what a command prints, read the diff (`git diff README.md
docs/`), update the prose around any example whose numbers changed, and commit. A full
refresh runs every example, the demo and several 20,000-row measurements included: about
10-20 minutes on 2 shared cores. It lowers its own priority (nice 19) first.

What it runs. A fenced block is an example when its first line starts with ``$ ``: each
``$ command`` line (with its ``\\`` continuation lines) is run with bash, and the lines
below it, up to the next ``$`` line, are replaced by what it printed: stdout and stderr
together, in the order a terminal shows them (progress bars draw only on a terminal, so
none appear). ``$ echo $?`` prints the exit code of the command before it. Blocks that run
a benchmark (``scripts/bench_*``, ``scripts/check_*``: their figures are measured on
purpose, with their load average) and blocks whose info string holds ``no-refresh`` are
left alone. A command that exits non-zero without a following ``$ echo $?`` is reported
as a warning, since the docs then show an error nobody meant to show.

Where it runs. Each document gets its own scratch folder that stands in for the
repository root: ``datasets_demo/`` is linked (read only), ``examples/`` is copied (the
nightly job writes its store and run file beside the job file), and ``./scripts/...``
runs the repository's script. Examples run in document order, so a later example finds
the files an earlier one wrote (``boosted.json`` from a ``measure`` example,
``curvefit-demo/`` from the demo). The scratch folder's path is written as the repository
root in the output, so the docs read as if run from the root; the folder's path has as
many characters as the root's, so shortened paths and padded columns come out the same.

Inputs a document describes but does not produce with a shown command:

- a fenced block with ``file=NAME`` in its info string (```` ```python file=lr.py ````)
  is written to NAME when it is reached, so the file the reader sees is the file used;
- an HTML comment ``<!-- refresh-docs: COMMAND -->`` runs COMMAND (bash, output
  discarded, a failure stops that document) when it is reached, e.g.
  ``<!-- refresh-docs: curvefit demo --quiet -->`` or a one-line Python that writes a table;
- ``<!-- refresh-docs: shown-as /tmp/nightly -->`` shows the scratch folder as that path
  instead of the repository root (for a document whose example runs in its own folder).

``--check`` runs everything the same way but writes nothing: it lists the blocks whose
output differs from what the document shows, after masking what varies from run to run
(seconds, dates and times, absolute paths, commit hashes, column padding), and says
whether only numbers differ or the text too. Exit code 0 when nothing differs, 1 otherwise.
``--shape`` compares less: per command, the number of output lines, each line's columns
(separated by two or more spaces) and leading label (``chosen:``), and the keys of a JSON
output; numbers and wording may change. tests/test_docs_examples.py runs that comparison
on every example (the slow documents only when ``CURVEFIT_DOCS_EXAMPLES=all``).

Progress and status lines are switched off (``CURVEFIT_PROGRESS=off``): on a terminal
they leave nothing behind, so the docs show what stays on screen; warnings still show.

A document edited while its examples run is not written (the run says so; run it again).
Not refreshed: prose, the Python sessions (``>>>``, checked by tests/test_docs_examples.py),
benchmark outputs, and tables computed from an example's files in Python (README's
"worst / measured" table, the measured-against-VC table of docs/bounds.md): after a
refresh, check those by hand.
"""

from __future__ import annotations

import argparse
import difflib
import json
import os
import random
import re
import shutil
import string
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_DOCS = ["README.md", "docs/*.md"]
NOT_OURS = {"docs/references.md"}     # no examples; kept out of the default set
LINKED = ("datasets_demo",)           # read-only inputs, linked into each scratch folder
COPIED = ("examples",)                # inputs that commands write beside, copied
COPY_IGNORE = shutil.ignore_patterns("history.db*", "*-run.json*", "trend.*", "__pycache__")
SKIP_COMMAND = re.compile(r"scripts/(bench_|check_)")
FENCE = re.compile(r"^(?P<indent>\s*)(?P<fence>`{3,}|~{3,})(?P<info>.*)$")
DIRECTIVE = re.compile(r"^\s*<!--\s*refresh-docs:\s*(?P<body>.*?)\s*-->\s*$")
EXIT_CODE = "echo $?"
DEFAULT_TIMEOUT = 45 * 60


@dataclass
class Step:
    """One ``$ command`` of a block and the output shown below it."""

    command: list[str]                       # the ``$`` line and its continuation lines
    output: list[str] = field(default_factory=list)

    @property
    def text(self) -> str:
        return "\n".join(self.command)[2:]   # without the leading "$ "


@dataclass
class Block:
    """A fenced block: lines ``start`` (opening fence) to ``end`` (closing fence)."""

    start: int
    end: int
    indent: str
    info: str
    body: list[str]

    def attribute(self, key: str) -> str | None:
        for word in self.info.split():
            if word.startswith(key + "="):
                return word[len(key) + 1:]
        return None

    @property
    def is_example(self) -> bool:
        if "no-refresh" in self.info.split() or self.attribute("file"):
            return False
        if not self.body or not self.body[0].startswith("$ "):
            return False
        return not any(SKIP_COMMAND.search(step.text) for step in self.steps())

    def steps(self) -> list[Step]:
        steps: list[Step] = []
        continued = False                    # the line before ended a command with "\\"
        for line in self.body:
            if continued:
                steps[-1].command.append(line)
            elif line.startswith("$ "):
                steps.append(Step([line]))
            elif steps:
                steps[-1].output.append(line)
            continued = (continued or line.startswith("$ ")) and line.endswith("\\")
        return steps


@dataclass
class Result:
    doc: str
    line: int
    old: list[str]
    new: list[str]
    warnings: list[str]


def parse(lines: list[str]) -> list[Block | tuple[int, str]]:
    """The document's fenced blocks and refresh-docs directives, in order."""
    items: list[Block | tuple[int, str]] = []
    i = 0
    while i < len(lines):
        directive = DIRECTIVE.match(lines[i])
        if directive:
            items.append((i, directive.group("body")))
            i += 1
            continue
        opening = FENCE.match(lines[i])
        if not opening:
            i += 1
            continue
        indent, fence = opening.group("indent"), opening.group("fence")
        j = i + 1
        while j < len(lines):
            closing = FENCE.match(lines[j])
            if closing and closing.group("fence").startswith(fence) and not closing.group("info").strip():
                break
            j += 1
        body = [line[len(indent):] if line.startswith(indent) else line.lstrip()
                for line in lines[i + 1:j]]
        items.append(Block(i, j, indent, opening.group("info").strip(), body))
        i = j + 1
    return items


def scratch_folder(length: int) -> Path:
    """A new empty folder whose path has ``length`` characters where possible.

    Outputs that shorten a long path ("…/model.py") or pad a column to it then read the
    same once the folder is written as the path it stands for."""
    for base in dict.fromkeys([tempfile.gettempdir(), "/tmp"]):
        free = length - len(base) - 1
        if free < 4 or not os.path.isdir(base):
            continue
        for _ in range(50):
            path = Path(base) / "".join(random.choices(string.ascii_lowercase, k=free))
            try:
                path.mkdir()
                return path
            except FileExistsError:
                continue
    return Path(tempfile.mkdtemp(prefix="refresh-docs-"))


class Workspace:
    """A scratch folder standing in for the repository root (or ``shown_as``) while one
    document runs."""

    def __init__(self, shown_as: str, timeout: float):
        self.shown_as = shown_as
        self.path = scratch_folder(len(shown_as))
        for entry in LINKED:
            (self.path / entry).symlink_to(ROOT / entry)
        for entry in COPIED:
            shutil.copytree(ROOT / entry, self.path / entry, ignore=COPY_IGNORE)
        self.timeout = timeout
        self.venv_ready = False
        self.env = dict(os.environ)
        self.env.update({
            "PATH": f"{ROOT / '.venv' / 'bin'}{os.pathsep}{os.environ.get('PATH', '')}",
            "PYTHONUNBUFFERED": "1",      # stdout and stderr interleave as on a terminal
            "MPLBACKEND": "Agg",
            "NO_COLOR": "1",
            # progress and status lines are for people waiting; on a terminal they leave
            # nothing behind, so the pasted outputs show none (warnings still show)
            "CURVEFIT_PROGRESS": "off",
            "GIT_DIR": str(ROOT / ".git"),  # the code version a store records: this checkout's
        })
        self.env.pop("VIRTUAL_ENV", None)

    def run(self, command: str) -> tuple[int, str]:
        command = re.sub(r"(^|\s)\./scripts/", lambda m: f"{m.group(1)}{ROOT}/scripts/", command)
        if re.search(r"scripts/(demo|test)\b", command) and not self.venv_ready:
            # a first run (or a changed pyproject.toml) installs the package; the docs show
            # a later run, so the installer's output is kept out of them
            subprocess.run(["bash", "-c", f'source "{ROOT}/scripts/_venv.sh" ""'], cwd=ROOT,
                           stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, timeout=self.timeout)
            self.venv_ready = True
        try:
            done = subprocess.run(["bash", "-c", command], cwd=self.path, env=self.env,
                                  stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
                                  stdin=subprocess.DEVNULL, timeout=self.timeout)
        except subprocess.TimeoutExpired as exc:
            text = (exc.stdout or b"").decode("utf-8", "replace")
            return 124, text + f"\n(refresh_docs: stopped after {self.timeout:.0f} s)"
        return done.returncode, done.stdout.decode("utf-8", "replace")

    def shown(self, text: str) -> list[str]:
        """Terminal view of ``text``: the last state of each redrawn line, no trailing
        blanks, the scratch folder written as the repository root (or ``shown-as``)."""
        for path in sorted({str(self.path), os.path.realpath(self.path)}, key=len, reverse=True):
            text = text.replace(path, self.shown_as)
        lines = [line.split("\r")[-1].rstrip() for line in text.splitlines()]
        while lines and not lines[-1]:
            lines.pop()
        return lines


def run_document(doc: Path, ws: Workspace, log) -> tuple[list[str], list[Result]]:
    """Run the examples of one document; returns its new lines and one Result per example."""
    lines = doc.read_text(encoding="utf-8").splitlines()
    rel = label(doc)
    results: list[Result] = []
    replacements: list[tuple[Block, list[str]]] = []
    for item in parse(lines):
        if isinstance(item, tuple):
            line, body = item
            if body.startswith("shown-as "):
                continue                         # read before the workspace was made
            log(f"{rel}:{line + 1}: setup: {body}")
            code, out = ws.run(body)
            if code != 0:
                raise SystemExit(f"{rel}:{line + 1}: setup command failed with exit {code}: {body}\n{out}")
            continue
        name = item.attribute("file")
        if name:
            target = ws.path / name
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_text("\n".join(item.body) + "\n", encoding="utf-8")
            continue
        if not item.is_example:
            continue
        new_body, warnings = [], []
        last_code = 0
        steps = item.steps()
        for k, step in enumerate(steps):
            new_body.extend(step.command)
            if step.text.strip() == EXIT_CODE:
                new_body.append(str(last_code))
                continue
            started = time.monotonic()
            log(f"{rel}:{item.start + 1}: $ {' '.join(s.strip() for s in step.command)[2:][:110]}")
            last_code, out = ws.run(step.text)
            output = ws.shown(out)
            new_body.extend(output)
            log(f"    exit {last_code}, {len(output)} lines, {time.monotonic() - started:.0f} s")
            checked = k + 1 < len(steps) and steps[k + 1].text.strip() == EXIT_CODE
            if last_code != 0 and not checked:
                first = next((x for x in output if x.strip()), "")
                warnings.append(f"{rel}:{item.start + 1}: `{step.text.strip()[:80]}` exited "
                                f"{last_code}: {first[:200]}")
        results.append(Result(rel, item.start + 1, item.body, new_body, warnings))
        replacements.append((item, new_body))
    for block, body in reversed(replacements):
        lines[block.start + 1:block.end] = [(block.indent + x) if x else x for x in body]
    return lines, results


VOLATILE = [
    (re.compile(r"\d{4}-\d{2}-\d{2}([ T]\d{2}:\d{2}(:\d{2})?)?"), "<date>"),
    (re.compile(r"(?<![\w.])/[\w.@+-]+(/[\w.@+-]+)+"), "<path>"),
    (re.compile(r"\b(?=[0-9a-f]*[a-f])(?=[0-9a-f]*[0-9])[0-9a-f]{7,64}\b"), "<hash>"),
    (re.compile(r"\b\d+(\.\d+)?\s?(s|seconds|ms|min)\b"), "<time>"),
    (re.compile(r"load average[^;\n]*"), "load average <load>"),
]
NUMBER = re.compile(r"\d[\d,]*(\.\d+)?(e[+-]?\d+)?")


def masked(lines: list[str], numbers: bool = False) -> list[str]:
    """Lines with what varies between runs masked and runs of spaces collapsed."""
    out = []
    for line in lines:
        for pattern, mask in VOLATILE:
            line = pattern.sub(mask, line)
        if numbers:
            line = NUMBER.sub("#", line)
        out.append(" ".join(line.split()))
    return out


def differences(results: list[Result]) -> list[str]:
    report = []
    for r in results:
        old, new = masked(r.old), masked(r.new)
        if old == new:
            continue
        kind = "numbers differ" if masked(r.old, True) == masked(r.new, True) else "text differs"
        report.append(f"{r.doc}:{r.line}: {kind}: {r.new[0][2:][:90] if r.new else ''}")
        diff = difflib.unified_diff(old, new, "shown", "now", n=0, lineterm="")
        report.extend("    " + x for x in list(diff)[2:14])
    return report


LABEL = re.compile(r"^\s*([A-Za-z][A-Za-z -]*?):(\s|$)")
COLUMNS = re.compile(r"\S(?:\S| (?! ))*")   # text separated by two or more spaces


def json_shape(value):
    """The keys of a JSON value, nested; lists by their first item; no values.

    Examples
    --------
    >>> json_shape({"a": 1, "b": [{"c": None}, {"c": 2}], "d": []})
    {'a': None, 'b': [{'c': None}], 'd': []}
    """
    if isinstance(value, dict):
        return {k: json_shape(v) for k, v in value.items()}
    if isinstance(value, list):
        return [json_shape(value[0])] if value else []
    return None


def output_shape(lines: list[str]) -> list:
    """The shape of one command's output: what must not drift, whatever the numbers.

    A JSON document (possibly after a few plain lines, such as warnings) gives its keys;
    every other line gives its column count (columns are separated by two or more
    spaces) and its leading label (``chosen:``, ``curvefit: warning:``); the number of
    lines counts too. Numbers, family names and sentences may change.

    Examples
    --------
    >>> output_shape(["size  test mean", "  100     12.5%", '{"a": 1}'])
    [(2, ''), (2, ''), {'a': None}]
    >>> output_shape(["chosen: power-law   a·n^(−b)"])
    [(2, 'chosen')]
    """
    for start, line in enumerate(lines):
        if line.startswith(("{", "[")):
            try:
                document = json.loads("\n".join(lines[start:]))
            except ValueError:
                continue
            return output_shape(lines[:start]) + [json_shape(document)]
    shape = []
    for line in lines:
        label = LABEL.match(line)
        shape.append((len(COLUMNS.findall(line)), label.group(1) if label else ""))
    return shape


def shape_differences(results: list[Result]) -> list[str]:
    """Examples whose fresh output differs in shape (lines, columns, labels, JSON keys)
    from what the document shows."""
    report = []
    for r in results:
        old = Block(0, 0, "", "", r.old).steps()
        new = Block(0, 0, "", "", r.new).steps()
        for k, (was, now) in enumerate(zip(old, new)):
            if was.text.strip() == EXIT_CODE:
                continue
            a, b = output_shape(was.output), output_shape(now.output)
            if a == b:
                continue
            where = next((i for i, (x, y) in enumerate(zip(a, b)) if x != y), min(len(a), len(b)))
            report.append(f"{r.doc}:{r.line}: step {k + 1} `{was.text.strip()[:70]}`: "
                          f"{len(was.output)} lines shown, {len(now.output)} now; first difference "
                          f"at output line {where + 1}:")
            report.append(f"    shown: {was.output[where] if where < len(was.output) else '(no line)'}")
            report.append(f"    now:   {now.output[where] if where < len(now.output) else '(no line)'}")
        if len(old) != len(new):
            report.append(f"{r.doc}:{r.line}: {len(old)} commands shown, {len(new)} run")
    return report


def label(doc: Path) -> str:
    """The document's path as the messages show it (relative to the root when inside)."""
    return doc.relative_to(ROOT).as_posix() if doc.is_relative_to(ROOT) else str(doc)


def shown_as(text: str) -> str:
    """The path a document's scratch folder is shown as (``shown-as``, or the root)."""
    for item in parse(text.splitlines()):
        if isinstance(item, tuple) and item[1].startswith("shown-as "):
            return item[1].removeprefix("shown-as ").strip()
    return str(ROOT)


def documents(names: list[str]) -> list[Path]:
    if names:
        paths = [(Path(n) if Path(n).is_absolute() else Path.cwd() / n).resolve() for n in names]
    else:
        paths = [p for pattern in DEFAULT_DOCS for p in sorted(ROOT.glob(pattern))
                 if p.relative_to(ROOT).as_posix() not in NOT_OURS]
    for p in paths:
        if not p.is_file():
            raise SystemExit(f"refresh_docs: no such document: {p}")
    return paths


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("docs", nargs="*", help="documents (default: README.md and docs/*.md)")
    parser.add_argument("--check", action="store_true", help="compare only, write nothing")
    parser.add_argument("--shape", action="store_true",
                        help="compare only the shape of each output (lines, columns, labels, JSON "
                             "keys), write nothing: what tests/test_docs_examples.py checks")
    parser.add_argument("--list", action="store_true", help="list the examples and exit")
    parser.add_argument("--keep", action="store_true", help="keep the scratch folders")
    parser.add_argument("--timeout", type=float, default=DEFAULT_TIMEOUT,
                        help="seconds allowed per command (default 2700)")
    args = parser.parse_args(argv)
    args.check = args.check or args.shape
    docs = documents(args.docs)
    if args.list:
        for doc in docs:
            for item in parse(doc.read_text(encoding="utf-8").splitlines()):
                if isinstance(item, Block) and item.is_example:
                    print(f"{label(doc)}:{item.start + 1}: {item.body[0][:100]}")
        return 0
    try:
        os.nice(19)                  # long measurements: leave the shared cores to others
    except OSError:
        pass
    log = lambda message: print(message, file=sys.stderr, flush=True)  # noqa: E731
    results: list[Result] = []
    folders: list[Path] = []
    try:
        for doc in docs:
            started = time.monotonic()
            before = doc.read_text(encoding="utf-8")
            ws = Workspace(shown_as(before), args.timeout)
            folders.append(ws.path)
            new_lines, doc_results = run_document(doc, ws, log)
            results.extend(doc_results)
            text = "\n".join(new_lines) + "\n"
            if args.check or text == before:
                continue
            if doc.read_text(encoding="utf-8") != before:   # edited while its examples ran
                log(f"warning: {label(doc)} changed while its examples ran; not written")
                continue
            doc.write_text(text, encoding="utf-8")
            log(f"{label(doc)}: refreshed ({time.monotonic() - started:.0f} s)")
    finally:
        for folder in folders:
            if args.keep:
                log(f"scratch folder kept: {folder}")
            else:
                shutil.rmtree(folder, ignore_errors=True)
    warnings = [w for r in results for w in r.warnings]
    for w in warnings:
        print(f"warning: {w}", file=sys.stderr)
    if args.check:
        report = shape_differences(results) if args.shape else differences(results)
        print("\n".join(report) if report else f"{len(results)} examples: output as shown")
        return 1 if report else 0
    return 0


if __name__ == "__main__":
    sys.exit(main())
