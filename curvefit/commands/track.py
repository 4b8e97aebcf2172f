"""`curvefit track` (being built)."""


def register(app):
    pass
