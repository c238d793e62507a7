"""Writing a file atomically: a reader sees the old file or the new one, never half of one.

One helper for every writer of the auditor. The data goes to a new file beside the target
(same folder, so the same file system), is flushed to disk, and is renamed over the target
with :func:`os.replace`, which is atomic on POSIX and Windows. The temporary file is created
with mode 0o666, which the operating system reduces by the user's umask, so an output gets
the permissions any other tool's new file would get (``tempfile.mkstemp`` would make it
0o600). On any failure the temporary file is removed and the target is left as it was.

References
----------
.. [1] IEEE Std 1003.1 (POSIX), ``rename()``: "If the link named by the new argument exists,
   it shall be removed and old renamed to new ... a link named new shall remain visible to
   other threads throughout the renaming operation"; ``open()`` with ``O_CREAT``: the file's
   permission bits are set to the mode argument "modified by the process' file mode
   creation mask".
"""

from __future__ import annotations

import os
import secrets
from pathlib import Path
from typing import BinaryIO, Callable, Union

__all__ = ["write_atomic", "Writer"]

#: Data for :func:`write_atomic`: bytes, text (encoded with ``encoding``), or a function that
#: writes to the open binary file it is given.
Writer = Union[bytes, bytearray, memoryview, str, Callable[[BinaryIO], object]]

_FLAGS = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)


def _create_beside(path: Path) -> tuple[int, Path]:
    """Open a new, empty file next to ``path`` (mode 0o666 less the umask)."""
    for _ in range(100):
        temporary = path.with_name(f".{path.name}.{secrets.token_hex(6)}.tmp")
        try:
            return os.open(temporary, _FLAGS, 0o666), temporary
        except FileExistsError:
            continue
        except OSError as err:  # name the file the caller asked for, not the temporary one
            raise type(err)(err.errno, err.strerror, str(path)) from None
    raise FileExistsError(f"could not create a temporary file beside {path}")


def _sync_folder(folder: Path) -> None:
    """Flush the folder entry of the rename to disk where the system allows it (POSIX)."""
    if os.name != "posix":
        return
    try:
        handle = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(handle)
    except OSError:
        pass
    finally:
        os.close(handle)


def write_atomic(path: str | os.PathLike[str], data: Writer, *, encoding: str = "utf-8") -> Path:
    """Write ``data`` to ``path`` atomically.

    Parameters
    ----------
    path : path-like
        The file to write. Its folder must exist; an existing file is replaced.
    data : bytes, str or callable
        The content: bytes as they are, text encoded with ``encoding``, or a function called
        with the open binary file (``lambda fh: workbook.save(fh)``) that writes the content.
    encoding : str
        Encoding of text ``data`` ("utf-8-sig" puts a byte-order mark first).

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    OSError
        The folder is missing or not writable, the disk is full ... (the target is untouched
        and no temporary file is left behind). Any exception of a ``data`` function passes
        through likewise.
    """
    target = Path(path)
    handle, temporary = _create_beside(target)
    try:
        with os.fdopen(handle, "wb") as fh:
            if callable(data):
                data(fh)
            elif isinstance(data, str):
                fh.write(data.encode(encoding))
            else:
                fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(temporary, target)
    except BaseException:
        try:
            os.unlink(temporary)
        except OSError:
            pass
        raise
    _sync_folder(target.parent)
    return target
