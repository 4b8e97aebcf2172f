"""The demo data shipped with the package: fruit graded at a fictional packhouse.

The table is synthetic (see ``datasets_demo/README.md`` in the source tree for its
columns and how it was made). It ships inside the package as ``packhouse.csv.gz``, a
gzipped, byte-for-byte copy of ``datasets_demo/packhouse.csv``, so that an installed
curvefit (a wheel, not only a source checkout) can run the demo. It is shipped rather
than generated at run time because numpy's random streams may change between versions.

Examples
--------
>>> demo_table_path().name
'packhouse.csv.gz'
>>> table = load_demo_table()
>>> table.shape
(20000, 13)
>>> bool(table["rejected"].isin([0, 1]).all())
True
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

from curvefit.core.errors import InputError

DEMO_FILE = "packhouse.csv.gz"


def demo_table_path() -> Path:
    """Path of the demo table inside the installed package (a gzipped CSV).

    Works for an installed wheel and for an editable install alike; `load_table`
    reads the file directly.

    Raises
    ------
    InputError
        The file is not there (a broken install, or a package built without its data).
    """
    path = Path(str(resources.files(__package__) / DEMO_FILE))
    if not path.is_file():
        raise InputError(f"the demo data is missing from the installed package ({path}); "
                         "reinstall curvefit, or run python scripts/make_demo_data.py in a "
                         "source checkout")
    return path


def load_demo_table():
    """The demo table as a pandas DataFrame (20,000 rows, 13 columns)."""
    from curvefit.measuring.data import load_table

    return load_table(demo_table_path())
