"""One module per CLI command.

Each module defines ``register(subparsers) -> ArgumentParser`` (adds its sub-parser, with an
example and the exit codes in its epilog) and ``run(args) -> int`` (exit code).  Modules are
discovered automatically; shared option groups live in :mod:`fitdrag.commands._options`.

Building the parser imports every command module, so their top level imports only argparse,
the standard library, :mod:`fitdrag.errors` and :mod:`fitdrag.units`; the library (numpy,
numba, ...) is imported inside ``run`` and the helpers it calls.  tests/test_cli.py checks
that ``fitdrag --help`` loads none of the heavy libraries.
"""
