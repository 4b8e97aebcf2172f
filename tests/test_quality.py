"""Quality gates: lint (ruff) and no copied blocks of code inside the package.

The duplicate check is our own and small: each module under ``curvefit/`` becomes a list
of normalised lines (stripped; comments, blank lines and import statements dropped), and
any run of at least ``MIN_RUN`` such lines that appears in two places fails the test,
with both places named. A shared helper in ``curvefit/core`` (or in the part that owns
the idea) is the fix, not a rewording of one copy.
"""

from __future__ import annotations

import ast
import io
import subprocess
import sys
import tokenize
from collections import defaultdict

import pytest

from conftest import ROOT

PACKAGE = ROOT / "curvefit"
MIN_RUN = 8


def normalised_lines(source: str) -> list[tuple[int, str]]:
    """(line number, text) of the lines that count: stripped, without comments, blank
    lines and import statements (which repeat by nature)."""
    text = source.splitlines()
    cut = {}  # line number -> column where a comment starts
    for tok in tokenize.generate_tokens(io.StringIO(source).readline):
        if tok.type == tokenize.COMMENT:
            cut[tok.start[0]] = tok.start[1]
    imports = set()
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            imports.update(range(node.lineno, node.end_lineno + 1))
    out = []
    for number, line in enumerate(text, start=1):
        if number in imports:
            continue
        stripped = line[:cut.get(number, len(line))].strip()
        if stripped:
            out.append((number, stripped))
    return out


def duplicate_runs(files: dict[str, str], min_run: int = MIN_RUN) -> list[dict]:
    """Runs of at least ``min_run`` normalised lines found in two places.

    Returns one dict per maximal run and pair of places: ``first`` and ``second`` as
    ``(file, first line, last line)``, ``length`` (normalised lines) and ``text`` (the
    first line of the run).

    Examples
    --------
    >>> body = "\\n".join(f"x{i} = {i}" for i in range(9))
    >>> runs = duplicate_runs({"a.py": body, "b.py": "y = 0\\n" + body}, min_run=8)
    >>> [(r["first"], r["second"], r["length"]) for r in runs]
    [(('a.py', 1, 9), ('b.py', 2, 10), 9)]
    """
    lines = {name: normalised_lines(src) for name, src in files.items()}
    where = defaultdict(list)  # a window of min_run lines -> its starts (file, index)
    for name, seq in lines.items():
        for i in range(len(seq) - min_run + 1):
            where[tuple(t for _, t in seq[i:i + min_run])].append((name, i))
    pairs = set()
    for starts in where.values():
        for k, (fa, ia) in enumerate(starts):
            for fb, ib in starts[k + 1:]:
                if fa != fb or abs(ia - ib) >= min_run:  # not a window overlapping itself
                    pairs.add((fa, ia, fb, ib))
    runs = []
    for fa, ia, fb, ib in sorted(pairs):
        if (fa, ia - 1, fb, ib - 1) in pairs:
            continue  # inside a run that starts earlier
        n = 1
        while (fa, ia + n, fb, ib + n) in pairs:
            n += 1
        length = n + min_run - 1
        a, b = lines[fa], lines[fb]
        runs.append({"first": (fa, a[ia][0], a[ia + length - 1][0]),
                     "second": (fb, b[ib][0], b[ib + length - 1][0]),
                     "length": length, "text": a[ia][1]})
    return runs


def _package_sources() -> dict[str, str]:
    return {str(p.relative_to(ROOT)): p.read_text(encoding="utf-8")
            for p in sorted(PACKAGE.rglob("*.py"))}


def test_normalised_lines_drop_comments_blank_lines_and_imports():
    src = ("import os\nfrom math import (\n    pi,\n    tau,\n)\n\n# a comment\n"
           "x = 1  # why\nif x:\n    y = 2\n")
    assert normalised_lines(src) == [(8, "x = 1"), (9, "if x:"), (10, "y = 2")]


def test_checker_finds_a_copied_block_and_ignores_a_short_one():
    block = "\n".join(f"total += values[{i}] * weights[{i}]" for i in range(8))
    short = "\n".join(f"total += values[{i}]" for i in range(7))
    found = duplicate_runs({"a.py": block + "\n" + short, "b.py": "# copied\n" + block,
                            "c.py": short})
    assert [(r["first"], r["second"]) for r in found] == [(("a.py", 1, 8), ("b.py", 2, 9))]


def test_no_copied_code_in_the_package():
    runs = duplicate_runs(_package_sources())
    report = "\n".join(f"  {a[0]}:{a[1]}-{a[2]} and {b[0]}:{b[1]}-{b[2]} ({r['length']} lines): "
                       f"{r['text'][:60]}" for r in runs for a, b in [(r["first"], r["second"])])
    assert not runs, (f"{len(runs)} blocks of >= {MIN_RUN} lines appear twice; "
                      f"move them to one place:\n{report}")


def test_ruff_finds_nothing():
    try:
        import ruff  # noqa: F401  (installed with the 'test' extra)
    except ImportError:
        pytest.fail("ruff is not installed; run ./scripts/test, which installs the 'test' extra")
    r = subprocess.run([sys.executable, "-m", "ruff", "check", "--no-cache", "--output-format", "concise",
                        "curvefit", "tests", "scripts"],
                       cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stdout[-6000:] + r.stderr[-2000:]
