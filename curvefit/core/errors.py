"""Exceptions that curvefit raises on purpose.

`InputError` means the user gave something curvefit cannot use (a missing file, an
absent column, a malformed option). The command line prints its message as one line on
stderr and exits with code 2; the Python API lets it propagate. Messages name the
problem and, where there is one, the fix.
"""


class InputError(ValueError):
    """Bad input or usage: one clear line for the user, exit code 2 on the CLI.

    Line breaks inside the message (from a column name or a value the user gave) are
    shown escaped, so the message stays one line.

    >>> str(InputError("no column 'a\\nb'"))
    "no column 'a\\\\nb'"
    """

    def __init__(self, *args):
        if len(args) == 1 and isinstance(args[0], str):
            args = (args[0].replace("\r", "\\r").replace("\n", "\\n"),)
        super().__init__(*args)


class FitWarning(UserWarning):
    """A result was computed but should be read with care (poorly determined, extrapolated)."""
