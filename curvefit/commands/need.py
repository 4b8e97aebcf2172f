"""`curvefit need` (being built)."""


def register(app):
    pass
