"""`curvefit bound` (being built)."""


def register(app):
    pass
