"""``python -m trimtab.cli``: the same as the ``trimtab`` console script."""

from trimtab.cli import main

main()
