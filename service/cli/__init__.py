"""The ``ratecast`` command line: one module per command group, sharing :mod:`service.cli.common`.

:func:`main` (from :mod:`service.cli.app`) is the console script's entry point;
``python -m service.cli`` runs it too.
"""

from __future__ import annotations

from service.cli.app import main

__all__ = ["main"]
