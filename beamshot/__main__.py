"""``python -m beamshot``: the same command line as the ``beamshot`` script."""

from .cli import main

if __name__ == "__main__":
    main()
