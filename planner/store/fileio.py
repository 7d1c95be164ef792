"""Whole writes for the store and the out directory: every byte or a clear error, no leftovers.

``os.write`` may write fewer bytes than asked (a nearly full disk, a signal); the helpers here
loop until everything is written and turn a full disk (or quota) into an :class:`InputError`
that names the file, so the command line prints one line and exits 2.
"""

from __future__ import annotations

import contextlib
import errno
import os
import tempfile
from collections.abc import Callable
from pathlib import Path

from planner.errors import InputError

#: errno values that mean "no room left": free space, then run the same command again
NO_SPACE = frozenset({errno.ENOSPC, errno.EDQUOT, errno.EFBIG})


def is_no_space(exc: BaseException) -> bool:
    """Whether ``exc`` says the disk (or the user's quota) is full.

    >>> is_no_space(OSError(errno.ENOSPC, "No space left on device")), is_no_space(OSError(errno.EIO, "x"))
    (True, False)
    """
    return isinstance(exc, OSError) and exc.errno in NO_SPACE


def write_error(path: Path | str, exc: OSError, *, what: str = "nothing was written") -> InputError:
    """The one-line error for a failed write of ``path``.

    >>> str(write_error("o/manifest.json", OSError(errno.ENOSPC, "No space left on device")))
    'o/manifest.json: disk full (No space left on device): nothing was written; free space and run again'
    """
    reason = exc.strerror or str(exc)
    if is_no_space(exc):
        return InputError(f"{path}: disk full ({reason}): {what}; free space and run again")
    return InputError(f"{path}: cannot write ({reason}): {what}")


def write_all(fd: int, data: bytes) -> None:
    """Write every byte of ``data`` to ``fd`` (looping over short writes); OSError otherwise."""
    view = memoryview(data)
    while view:
        n = os.write(fd, view)
        if n <= 0:  # a regular file never does this unless it cannot take more
            raise OSError(errno.ENOSPC, "short write: no byte written")
        view = view[n:]


def umask() -> int:
    old = os.umask(0o022)
    os.umask(old)
    return old


def remove_quietly(path: Path | str) -> None:
    with contextlib.suppress(FileNotFoundError):
        os.unlink(path)


def atomic_write(path: Path | str, data: bytes | str, *, error: Callable[..., InputError] = write_error,
                 mode: int | None = None, unchanged: str = "the old file is unchanged") -> None:
    """Replace ``path`` with ``data`` (text is written as UTF-8) via a temporary file beside it
    (fsynced, then renamed): the one atomic write of planner (manifest, target copy, reports).

    Readers see the old or the new file, never half of one; on any failure the temporary file
    is removed and the old file is left as it was (``error(path, exc, what=unchanged)``: the
    InputError naming ``path``). ``mode``: the new file's permissions (default: 0666 less the
    umask, as for any new file).

    >>> import tempfile; d = Path(tempfile.mkdtemp())
    >>> atomic_write(d / "a.txt", "one"); atomic_write(d / "a.txt", b"two"); (d / "a.txt").read_text()
    'two'
    >>> sorted(p.name for p in d.iterdir())
    ['a.txt']
    """
    path = Path(path)
    if isinstance(data, str):
        data = data.encode("utf-8")
    try:
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}-", suffix=".tmp")
    except OSError as exc:
        raise error(path, exc) from None
    try:
        try:
            # mkstemp makes 0600; other jobs and users read these
            os.fchmod(fd, (0o666 & ~umask()) if mode is None else mode)
            write_all(fd, data)
            os.fsync(fd)
        finally:
            os.close(fd)
        os.replace(tmp, path)
    except OSError as exc:
        remove_quietly(tmp)
        raise error(path, exc, what=unchanged) from None
    except BaseException:
        remove_quietly(tmp)
        raise


def fsync_dir(directory: Path) -> None:
    """Make a rename in ``directory`` durable (best effort: some file systems refuse)."""
    try:
        fd = os.open(directory, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
