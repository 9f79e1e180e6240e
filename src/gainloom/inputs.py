"""Reading the user's input files (schedules, gains files) safely.

Only regular files are read, and at most a given number of bytes: a named
pipe would block the run forever, ``/dev/zero`` would fill the memory.  The
file's kind is taken with ``stat`` (which never blocks) and checked again on
the open descriptor, which is opened non-blocking in case the name was
swapped for a pipe in between.
"""

from __future__ import annotations

import os
import stat

from .errors import ScheduleError
from .outputs import describe_os_error, file_kind

__all__ = ["read_input_file"]


def read_input_file(path: str | os.PathLike, what: str, limit: int) -> bytes:
    """The bytes of a regular file of at most ``limit`` bytes.

    Parameters
    ----------
    path : path
        The file to read (a symbolic link to a regular file is followed).
    what : str
        What the file is, for messages (e.g. ``"schedule file"``).
    limit : int
        Largest size accepted, bytes.

    Raises
    ------
    ScheduleError
        Missing or unreadable file, not a regular file, or larger than
        ``limit``; the message names the file.
    """
    file = os.fspath(path)
    try:
        if not stat.S_ISREG(os.stat(file).st_mode):
            raise ScheduleError(f"{what} must be a regular file; this is {file_kind(os.stat(file).st_mode)}", file=file)
        descriptor = os.open(file, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
        with os.fdopen(descriptor, "rb") as stream:
            mode = os.fstat(stream.fileno()).st_mode
            if not stat.S_ISREG(mode):
                raise ScheduleError(f"{what} must be a regular file; this is {file_kind(mode)}", file=file)
            data = stream.read(limit + 1)
    except OSError as error:
        raise ScheduleError(f"cannot read {what}: {describe_os_error(error, with_path=False)}", file=file) from None
    if len(data) > limit:
        raise ScheduleError(f"{what} is larger than {limit:,} bytes, the most gainloom reads", file=file)
    return data
