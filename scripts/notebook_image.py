"""Draw docs/notebook-display.png, the README's picture of curvefit in a notebook.

Runs examples/notebook.ipynb in a real Jupyter kernel (nbclient), takes two of its
outputs, the HTML table that a `Curve` shows (cell tagged ``curve-table``) and the PNG
that ``fit.plot()`` draws (``fit-plot``), and lays them out as two notebook cells with
matplotlib: the table's cells are read from the HTML and redrawn as a matplotlib table,
the figure is the kernel's PNG as it is. No browser is involved, so the picture is a
faithful copy of the outputs' content, not a screenshot of a browser's rendering.

    .venv/bin/python scripts/notebook_image.py [--out docs/notebook-display.png]
"""

from __future__ import annotations

import argparse
import base64
import io
import tempfile
from html.parser import HTMLParser
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


class TableCells(HTMLParser):
    """The rows of the first HTML table: a list of lists of cell texts."""

    def __init__(self):
        super().__init__()
        self.rows: list[list[str]] = []
        self.title = ""
        self._cell: list[str] | None = None
        self._strong = False
        self._done = False

    def handle_starttag(self, tag, attrs):
        if self._done:
            return
        if tag == "tr":
            self.rows.append([])
        elif tag in ("td", "th"):
            self._cell = []
        elif tag == "strong":
            self._strong = True

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None and self.rows:
            self.rows[-1].append("".join(self._cell).strip())
            self._cell = None
        elif tag == "strong":
            self._strong = False
        elif tag == "table":
            self._done = True

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)
        elif self._strong and not self.title:
            self.title = data.strip()


def run_notebook() -> dict:
    """The outputs of the example notebook's cells, by tag."""
    import nbclient
    import nbformat

    nb = nbformat.read(ROOT / "examples" / "notebook.ipynb", as_version=4)
    with tempfile.TemporaryDirectory() as tmp:
        nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                                resources={"metadata": {"path": tmp}}).execute()
    return {c.metadata["tags"][0]: c.outputs for c in nb.cells
            if c.cell_type == "code" and c.metadata.get("tags")}


def first(outputs: list, mime: str) -> str:
    for o in outputs:
        if mime in o.get("data", {}):
            return o["data"][mime]
    raise SystemExit(f"no {mime} output in the notebook cell")


def draw(table_html: str, plot_png: bytes, out: Path) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.image as mpimg
    import matplotlib.pyplot as plt

    cells = TableCells()
    cells.feed(table_html)
    image = mpimg.imread(io.BytesIO(plot_png), format="png")
    fig = plt.figure(figsize=(9.0, 9.4), dpi=110)
    grid = fig.add_gridspec(4, 1, height_ratios=[0.3, 2.3, 0.3, 5.6], hspace=0.15)
    mono = {"family": "DejaVu Sans Mono", "size": 10}
    prompt = fig.add_subplot(grid[0])
    prompt.axis("off")
    prompt.text(0, 0.5, "In [3]:  curve", fontdict=mono, va="center", color="#303f9f")
    tab = fig.add_subplot(grid[1])
    tab.axis("off")
    tab.set_title(cells.title, loc="left", fontsize=10, fontweight="bold", pad=2)
    head, body = cells.rows[0], cells.rows[1:]
    t = tab.table(cellText=body, colLabels=head, loc="upper left", cellLoc="right",
                  colLoc="right", edges="horizontal")
    t.auto_set_font_size(False)
    t.set_fontsize(8.5)
    t.auto_set_column_width(list(range(len(head))))
    t.scale(1, 1.25)
    for (row, _), cell in t.get_celld().items():
        cell.set_edgecolor("#d0d4d8")
        if row == 0:
            cell.set_text_props(fontweight="bold")
    prompt2 = fig.add_subplot(grid[2])
    prompt2.axis("off")
    prompt2.text(0, 0.5, "In [6]:  fit.plot();", fontdict=mono, va="center", color="#303f9f")
    pic = fig.add_subplot(grid[3])
    pic.axis("off")
    pic.imshow(image)
    fig.savefig(out, facecolor="white", bbox_inches="tight", metadata={"Software": None})


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=ROOT / "docs" / "notebook-display.png")
    args = parser.parse_args()
    outputs = run_notebook()
    png = base64.b64decode(first(outputs["fit-plot"], "image/png"))
    draw(first(outputs["curve-table"], "text/html"), png, args.out)
    print(f"wrote {args.out}")


if __name__ == "__main__":
    main()
