"""The ``headcount`` command line: a thin layer over the core, one module per command.

``main`` builds the parser from one table of commands and turns
:class:`~inspector.errors.HeadcountError` into one line on stderr and exit status 2;
``common`` holds what every command shares (opening the model, the model argument);
``analyze``, ``corpus`` and ``explain`` each register one sub-command; ``demo`` is the
headless job of ``make start``. May import every other stage; nothing imports it
except the console script.
"""

from __future__ import annotations


def main(argv=None) -> int:
    """Run the command line (see :func:`inspector.cli.main.main`)."""
    from inspector.cli.main import main as run

    return run(argv)
