"""`curvefit fit` (being built)."""


def register(app):
    pass
