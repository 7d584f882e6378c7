"""Console entry point: install the Ctrl-C handler first, then import the (heavy) CLI."""

from __future__ import annotations

import sys


def main() -> None:  # pragma: no cover - exercised through subprocess tests
    from . import interrupt

    interrupt.install()
    interrupt.checkpoint("start")
    from .cli import app
    from .cli_support import run_app

    sys.exit(run_app(app))
