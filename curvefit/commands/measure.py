"""`curvefit measure` (being built)."""


def register(app):
    pass
