"""``python -m pvsource``: the same as the ``pvsource`` command."""

from pvsource.cli import main

main()
