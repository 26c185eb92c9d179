"""``python -m partpick``: the same as the ``partpick`` command."""

from partpick.cli import main

main()
