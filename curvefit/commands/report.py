"""`curvefit report` (being built)."""


def register(app):
    pass
