"""``python -m beamshot``: the same command line as the ``beamshot`` script."""

from .cli import main

main()
