"""Output folders whose files are never lost or half-written.

Any layer that writes files (code generation, reports) goes through
:func:`write_outputs`:

1. **All or nothing before the first replace.**  The caller renders every
   file to text or bytes first; the writer then writes each one to a
   temporary file in the destination folder (same file system, so the final
   step is an atomic rename), flushes and fsyncs it.  Only when every
   temporary file is complete are they moved into place with ``os.replace``.
   A failure before that point removes the temporaries and leaves the
   folder's previous files untouched.
2. **A manifest of what gainloom wrote.**  ``.gainloom-manifest.json`` in the
   folder lists each file gainloom wrote with its SHA-256.  gainloom refuses
   to overwrite a file that is not in the manifest (someone else's file) or
   whose content no longer matches its recorded hash (edited by hand since),
   unless ``force=True`` (``--force`` on the command line).
3. **Deterministic manifest.**  Sorted keys, no timestamps.

4. **No links, no surprises.**  A file gainloom would write or replace (or
   the manifest) that is a symbolic link, a folder or anything but a regular
   file is refused, even with ``force``: gainloom never writes through a link
   to a place outside the folder.  Existing files are read with
   ``O_NOFOLLOW``, and ``os.replace`` renames over a name without following
   it.
5. **Failures of the file system are one clear error.**  A full disk, a
   read-only folder, a name too long or a folder below a regular file raise
   :class:`OutputWriteError` (exit 2) naming the path and the reason; the
   temporary files are removed, the folder's earlier files stay as they
   were, and a folder this call created is removed again when nothing was
   written into it.

On POSIX ``os.replace`` of each file is atomic; a crash between two replaces
can leave a folder with some new and some old files, each of them complete.
The manifest's new content is written (to a temporary file) with the others,
before the first replace, and moved into place last.
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import secrets
import stat
from collections.abc import Mapping
from pathlib import Path

from .errors import GainloomError, InputError

__all__ = [
    "MANIFEST_NAME",
    "OutputConflictError",
    "OutputWriteError",
    "check_output_folder",
    "describe_os_error",
    "file_kind",
    "find_conflicts",
    "read_manifest",
    "sha256_bytes",
    "write_outputs",
]

#: File name of the manifest in every output folder gainloom writes.
MANIFEST_NAME = ".gainloom-manifest.json"
_MANIFEST_FORMAT = "gainloom-manifest/1"
_TEMP_START = ".gainloom-tmp-"
#: Longest output file name in bytes (the common file-system limit, NAME_MAX).
_NAME_MAX = 255


class OutputConflictError(InputError):
    """An output file exists that gainloom did not write (or that was edited),
    or is in the way: a symbolic link, a folder, not a regular file."""


class OutputWriteError(GainloomError):
    """The file system refused to create or write an output (disk full,
    read-only, name too long, ...).  Nothing was replaced."""


def sha256_bytes(data: bytes) -> str:
    """Hex SHA-256 of ``data``."""
    return hashlib.sha256(data).hexdigest()


def describe_os_error(error: OSError, *, with_path: bool = True) -> str:
    """One line for an ``OSError``: path, reason and errno name.

    Parameters
    ----------
    error : OSError
        The error as raised by the operating system call.
    with_path : bool
        Start with the path the error names (when it names one).
    """
    code = errno.errorcode.get(error.errno or 0)
    reason = error.strerror or str(error)
    where = f"{error.filename}: " if error.filename and with_path else ""
    return f"{where}{reason}" + (f" ({code})" if code else "")


def file_kind(mode: int) -> str:
    """Plain words for a file type from ``st_mode`` (e.g. "a symbolic link")."""
    if stat.S_ISLNK(mode):
        return "a symbolic link"
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a named pipe"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _existing_regular(path: Path) -> bool:
    """True if ``path`` is a regular file, False if absent; refuse anything else."""
    try:
        mode = os.lstat(path).st_mode
    except FileNotFoundError:
        return False
    except OSError as error:
        raise OutputWriteError(f"cannot inspect output file: {describe_os_error(error)}") from None
    if not stat.S_ISREG(mode):
        raise OutputConflictError(
            f"refusing to write {path}: it is {file_kind(mode)}; gainloom writes only regular files and never "
            "through a link (not even with --force); remove it or choose another output folder"
        )
    return True


def _read_regular(path: Path) -> bytes:
    """Bytes of a regular file, without following a link at its name."""
    try:
        descriptor = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
        with os.fdopen(descriptor, "rb") as stream:
            return stream.read()
    except OSError as error:
        raise OutputWriteError(f"cannot read output file: {describe_os_error(error)}") from None


def check_output_folder(folder: str | os.PathLike) -> Path:
    """Return ``folder`` as a Path if gainloom can create or write it.

    Called before any work is done (so bad output paths are found at once)
    and again by :func:`write_outputs`.  A folder that is itself a symbolic
    link to a folder is accepted: the user chose it.

    Parameters
    ----------
    folder : path
        Output folder; need not exist.

    Raises
    ------
    InputError
        Empty path, a path that exists and is not a folder, or one below a
        regular file.
    OutputWriteError
        A folder that exists but cannot be written, or a path the system
        refuses (name too long, no permission).
    """
    text = os.fspath(folder)
    if not isinstance(text, str) or not text.strip():
        raise InputError(f"output folder {text!r} is empty; give a folder name (e.g. --out out)")
    path = Path(text)
    if path.is_symlink() and not path.exists():
        raise InputError(f"output folder {path} is a symbolic link to nothing; remove it or choose another folder")
    probe = path
    while True:
        try:
            mode = os.stat(probe).st_mode
        except (FileNotFoundError, NotADirectoryError):
            if probe.parent == probe:
                break
            probe = probe.parent
            continue
        except OSError as error:
            raise OutputWriteError(f"cannot use output folder {path}: {describe_os_error(error)}") from None
        if not stat.S_ISDIR(mode):
            what = "exists and is" if probe == path else f"lies below {probe}, which is"
            kind = "a file" if stat.S_ISREG(mode) else file_kind(mode)
            raise InputError(f"output folder {path} {what} {kind}, not a folder")
        if not os.access(probe, os.W_OK | os.X_OK):
            if probe == path:
                raise OutputWriteError(f"cannot write into output folder {path}: read-only or no permission")
            raise OutputWriteError(f"cannot create output folder {path}: no permission to write in {probe}")
        break
    return path


def read_manifest(folder: str | os.PathLike) -> dict[str, str]:
    """File name to SHA-256 of the files gainloom wrote in ``folder``.

    Returns an empty dict when there is no manifest.

    Raises
    ------
    InputError
        When the manifest exists but is not one gainloom wrote, or is a
        symbolic link or not a regular file.
    """
    path = Path(folder) / MANIFEST_NAME
    if not _existing_regular(path):
        return {}
    try:
        data = json.loads(_read_regular(path).decode("utf-8"))
        files = data["files"]
        if data.get("format") != _MANIFEST_FORMAT or not isinstance(files, dict):
            raise ValueError("unexpected layout")
        return {str(k): str(v) for k, v in files.items()}
    except (ValueError, KeyError, TypeError) as error:
        raise InputError(
            f"{path}: not a gainloom manifest ({error}); remove it or choose another output folder"
        ) from None


def _as_bytes(name: str, content: str | bytes) -> bytes:
    if isinstance(content, bytes):
        return content
    if isinstance(content, str):
        return content.encode("utf-8")
    raise InputError(f"content of {name!r} must be str or bytes; got {type(content).__name__}")


def _check_name(name: str) -> None:
    if not name or name != Path(name).name or name in (".", "..", MANIFEST_NAME) or name.startswith(_TEMP_START):
        raise InputError(f"output file name {name!r} must be a plain file name inside the folder")
    if len(os.fsencode(name)) > _NAME_MAX:
        raise InputError(f"output file name {name[:40]!r}... is longer than {_NAME_MAX} bytes")


def _write_temp(folder: Path, data: bytes) -> Path:
    """Write ``data`` to a new temporary file in ``folder`` (created exclusively)."""
    temp = folder / f"{_TEMP_START}{secrets.token_hex(8)}"
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0)
    descriptor = os.open(temp, flags, 0o644)
    try:
        view = memoryview(data)
        while view:
            view = view[os.write(descriptor, view):]
        os.fsync(descriptor)
    except BaseException:
        os.close(descriptor)
        temp.unlink(missing_ok=True)
        raise
    os.close(descriptor)
    return temp


def _fsync_folder(folder: Path) -> None:
    try:
        descriptor = os.open(folder, os.O_RDONLY)
    except OSError:  # not possible on every platform (e.g. Windows)
        return
    try:
        os.fsync(descriptor)
    except OSError:
        pass
    finally:
        os.close(descriptor)


def _conflicts(folder: Path, names, manifest: dict[str, str]) -> list[str]:
    found = []
    for name in names:
        target = folder / name
        if not _existing_regular(target):
            continue
        if name not in manifest:
            found.append(f"{target} was not written by gainloom")
        elif sha256_bytes(_read_regular(target)) != manifest[name]:
            found.append(f"{target} was changed since gainloom wrote it")
    return found


def find_conflicts(folder: str | os.PathLike, names) -> list[str]:
    """Files of ``names`` in ``folder`` that :func:`write_outputs` would refuse without ``force``.

    For a job that writes several folders and checks them all before writing
    any.  A missing folder has none.
    """
    path = Path(folder)
    if not path.is_dir():
        return []
    return _conflicts(path, names, read_manifest(path))


def _make_folder(folder: Path) -> Path | None:
    """Create ``folder`` (with parents); return the topmost folder created, if any."""
    missing = [p for p in (folder, *folder.parents) if not p.exists()]
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise OutputWriteError(f"cannot create output folder {folder}: {describe_os_error(error)}") from None
    return missing[-1] if missing else None


def _remove_empty(created: Path | None, folder: Path) -> None:
    if created is None:
        return
    for path in (folder, *folder.parents):
        try:
            path.rmdir()
        except OSError:
            return
        if path == created:
            return


def write_outputs(folder: str | os.PathLike, files: Mapping[str, str | bytes], *, force: bool = False) -> list[Path]:
    """Write rendered files into ``folder`` safely (see module docstring).

    Parameters
    ----------
    folder : path
        Output folder; created (with parents) if missing.
    files : mapping of str to str or bytes
        File name (no directories) to complete content; text is written as
        UTF-8 exactly as given.
    force : bool
        Overwrite files gainloom did not write or that were edited since.

    Returns
    -------
    list of Path
        The written files, in the order given.

    Raises
    ------
    OutputConflictError
        When a file would be overwritten that gainloom did not write, or that
        changed since it did, and ``force`` is false; or when a name is taken
        by a link, a folder or another non-regular file.  Nothing is written.
    OutputWriteError
        When the file system refuses (full, read-only, ...).  Nothing is
        replaced and no temporary file is left.
    InputError
        For a bad folder, file name or content type.
    """
    contents = {}
    for name, content in files.items():
        _check_name(name)
        contents[name] = _as_bytes(name, content)
    folder = check_output_folder(folder)
    created = _make_folder(folder)
    try:
        manifest = read_manifest(folder)
        conflicts = _conflicts(folder, contents, manifest)
    except GainloomError:
        _remove_empty(created, folder)
        raise
    if conflicts and not force:
        _remove_empty(created, folder)
        raise OutputConflictError(
            "refusing to overwrite: " + "; ".join(conflicts) + " (use --force, or force=True, to overwrite)"
        )
    final = {**manifest, **{name: sha256_bytes(data) for name, data in contents.items()}}
    staged = {**contents, MANIFEST_NAME: _manifest_bytes(final)}

    temporaries: dict[str, Path] = {}
    try:
        for name, data in staged.items():
            temporaries[name] = _write_temp(folder, data)
    except OSError as error:
        for temp in temporaries.values():
            temp.unlink(missing_ok=True)
        _remove_empty(created, folder)
        raise OutputWriteError(
            f"cannot write {folder / name}: {describe_os_error(error)}; nothing was replaced "
            f"and no temporary file is left"
        ) from None
    except BaseException:
        for temp in temporaries.values():
            temp.unlink(missing_ok=True)
        raise
    try:
        for name, temp in temporaries.items():  # the manifest last
            os.replace(temp, folder / name)
            if name != MANIFEST_NAME:
                manifest[name] = final[name]
    except OSError as error:
        raise OutputWriteError(
            f"cannot move {name} into place in {folder}: {describe_os_error(error)}; "
            + _record_partial(folder, manifest)
        ) from None
    finally:
        for temp in temporaries.values():
            temp.unlink(missing_ok=True)
    _fsync_folder(folder)
    return [folder / name for name in contents]


def _manifest_bytes(files: Mapping[str, str]) -> bytes:
    document = {"format": _MANIFEST_FORMAT, "files": dict(sorted(files.items()))}
    return (json.dumps(document, indent=2, sort_keys=True) + "\n").encode("utf-8")


def _record_partial(folder: Path, on_disk: dict[str, str]) -> str:
    """After a failed replace: make the manifest say what is on disk; return what happened."""
    try:
        os.replace(_write_temp(folder, _manifest_bytes(on_disk)), folder / MANIFEST_NAME)
    except OSError as error:
        return f"the manifest could not be updated either ({describe_os_error(error)})"
    return "every file is whole and the manifest records which version each one is"
