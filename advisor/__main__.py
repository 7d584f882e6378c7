"""``python -m advisor``: the same as the ``advisor`` command."""

from .entry import main

main()
