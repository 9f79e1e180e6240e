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

On POSIX ``os.replace`` of each file is atomic; a crash between two replaces
can leave a folder with some new and some old files, each of them complete.
The manifest is rewritten after the replaces and records what is actually on
disk, so the next run sees a consistent picture.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from collections.abc import Mapping
from pathlib import Path

from .errors import InputError

__all__ = ["MANIFEST_NAME", "OutputConflictError", "write_outputs", "read_manifest", "sha256_bytes"]

#: File name of the manifest in every output folder gainloom writes.
MANIFEST_NAME = ".gainloom-manifest.json"
_MANIFEST_FORMAT = "gainloom-manifest/1"


class OutputConflictError(InputError):
    """An output file exists that gainloom did not write (or that was edited)."""


def sha256_bytes(data: bytes) -> str:
    """Hex SHA-256 of ``data``."""
    return hashlib.sha256(data).hexdigest()


def read_manifest(folder: str | os.PathLike) -> dict[str, str]:
    """File name to SHA-256 of the files gainloom wrote in ``folder``.

    Returns an empty dict when there is no manifest.

    Raises
    ------
    InputError
        When the manifest exists but is not one gainloom wrote.
    """
    path = Path(folder) / MANIFEST_NAME
    if not path.exists():
        return {}
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
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
    if not name or name != Path(name).name or name in (".", "..", MANIFEST_NAME) or name.startswith(".gainloom-tmp"):
        raise InputError(f"output file name {name!r} must be a plain file name inside the folder")


def _write_temp(folder: Path, name: str, data: bytes) -> Path:
    handle, temp = tempfile.mkstemp(prefix=f".gainloom-tmp-{name}-", dir=folder)
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(data)
            stream.flush()
            os.fsync(stream.fileno())
    except BaseException:
        Path(temp).unlink(missing_ok=True)
        raise
    return Path(temp)


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
        changed since it did, and ``force`` is false.  Nothing is written.
    InputError
        For a bad file name or content type.
    """
    folder = Path(folder)
    contents = {}
    for name, content in files.items():
        _check_name(name)
        contents[name] = _as_bytes(name, content)
    if folder.exists() and not folder.is_dir():
        raise InputError(f"output folder {folder} exists and is not a folder")
    folder.mkdir(parents=True, exist_ok=True)
    manifest = read_manifest(folder)

    if not force:
        conflicts = []
        for name in contents:
            target = folder / name
            if not target.exists():
                continue
            if name not in manifest:
                conflicts.append(f"{target} was not written by gainloom")
            elif sha256_bytes(target.read_bytes()) != manifest[name]:
                conflicts.append(f"{target} was changed since gainloom wrote it")
        if conflicts:
            raise OutputConflictError(
                "refusing to overwrite: " + "; ".join(conflicts) + " (use --force, or force=True, to overwrite)"
            )

    temporaries: dict[str, Path] = {}
    try:
        for name, data in contents.items():
            temporaries[name] = _write_temp(folder, name, data)
    except BaseException:
        for temp in temporaries.values():
            temp.unlink(missing_ok=True)
        raise

    written: list[Path] = []
    try:
        for name, temp in temporaries.items():
            os.replace(temp, folder / name)
            manifest[name] = sha256_bytes(contents[name])
            written.append(folder / name)
    finally:
        for temp in temporaries.values():
            temp.unlink(missing_ok=True)
        document = {"format": _MANIFEST_FORMAT, "files": dict(sorted(manifest.items()))}
        text = json.dumps(document, indent=2, sort_keys=True) + "\n"
        os.replace(_write_temp(folder, MANIFEST_NAME, text.encode("utf-8")), folder / MANIFEST_NAME)
        _fsync_folder(folder)
    return written
