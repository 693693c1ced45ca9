"""Writing one file whole: a temporary file beside it, flushed to disk, then one rename.

A reader (or a crash) never sees half a file: before the rename the old file stands, after it the
new one (POSIX rename is atomic within a file system).  The report *sets* use
:func:`beamshot.report.output.write_set`, which swaps a whole folder the same way.
"""

from __future__ import annotations

import contextlib
import os
import secrets

__all__ = ["write_text_atomic", "can_write_beside"]


def write_text_atomic(path, text: str, *, encoding: str = "utf-8", errors: str = "strict",
                      newline: str = "\n") -> None:
    """Write ``text`` to ``path`` through a temporary file beside it and one rename (``OSError`` as raised)."""
    path = os.fspath(path)
    tmp = f"{path}.{os.getpid()}-{secrets.token_hex(4)}.tmp"
    try:
        with open(tmp, "w", encoding=encoding, errors=errors, newline=newline) as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    finally:
        with contextlib.suppress(FileNotFoundError):
            os.remove(tmp)


def can_write_beside(path) -> str | None:
    """None if a file can be created in ``path``'s folder, else why not (checked by creating and
    removing a temporary file there: permission bits do not tell for root or for /proc and /sys)."""
    import tempfile

    folder = os.path.dirname(os.path.abspath(os.fspath(path))) or "."
    try:
        with tempfile.TemporaryFile(dir=folder):
            pass
    except OSError as exc:
        return exc.strerror or str(exc)
    return None
