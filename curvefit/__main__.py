"""``python -m curvefit``: the command line."""

from curvefit.cli.main import main

main()
