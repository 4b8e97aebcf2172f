"""The command line: parse options, call the API, print, map errors to exit codes.

One module per command, each with ``register(app)``; ``common`` holds the output
streams and option parsing they share. Nothing here computes an estimate: commands
parse, call a function of the API and print what it returns.
"""

COMMANDS = ["measure", "fit", "need", "capacity", "bound", "tradeoff", "report",
            "track", "history", "demo", "plan"]
