"""One module per CLI command.

Each module defines ``register(subparsers) -> ArgumentParser`` (adds its sub-parser, with an
example in its epilog) and ``run(args) -> int`` (exit code).  Modules are discovered
automatically; shared option groups live in :mod:`fitdrag.commands._options`.
"""
