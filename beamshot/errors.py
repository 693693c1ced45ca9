"""The one exception type a user sees: a problem with the inputs and how to fix it."""

__all__ = ["BeamshotError"]


class BeamshotError(ValueError):
    """An input problem reported to the user as one line (the CLI exits with code 2)."""
