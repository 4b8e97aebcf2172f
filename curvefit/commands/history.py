"""`curvefit history` (being built)."""


def register(app):
    pass
