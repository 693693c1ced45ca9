"""The one exception type a user sees: a problem with the inputs and how to fix it."""

__all__ = ["BeamshotError", "read_user_file"]


class BeamshotError(ValueError):
    """An input problem reported to the user as one line (the CLI exits with code 2)."""


def read_user_file(path, folder_hint: str) -> bytes:
    """The bytes of a file the user named, or a one-line :class:`BeamshotError` saying what is wrong."""
    try:
        with open(path, "rb") as fh:
            return fh.read()
    except FileNotFoundError:
        raise BeamshotError(f"{path}: no such file; check the path") from None
    except IsADirectoryError:
        raise BeamshotError(f"{path}: is a folder, {folder_hint}") from None
    except OSError as exc:
        raise BeamshotError(f"{path}: cannot be read ({exc.strerror or exc})") from None
