"""Cell files: load (with schema migration), atomic save with a backup, content versions.

Loading never writes: a file of an older schema version is migrated in memory
and written in the current version only when it is saved. A file of a newer
schema version is refused, naming both versions.

Saving is atomic (common practice for crash-safe writes): the JSON is written
to a temporary file in the same folder, flushed and fsynced, renamed over the
target, and the folder is fsynced. Before that, the previous content of the
target is kept as ``<name>.bak`` (one backup, the version before the last
save), written the same atomic way. A symbolic link is followed, so the file it
points to is updated.

A save that cannot be made raises :class:`CellSaveError` naming the file and
what happened (no space left, a read-only file system, a folder without write
permission, a cell file the user made read-only) and leaves the file as it
was. A file without its owner's write permission bit is never replaced, even
by a process that could (the superuser): the bit is the user's "do not
change" mark. A save killed half-way leaves at most a temporary file
(``.<name>.<random>.tmp`` beside the cell file), which
:func:`remove_leftover_temporaries` deletes at the next start.

The content version (ETag) of a cell is the SHA-256 of its canonical JSON
(keys sorted, no whitespace), so formatting changes in the file do not count as
edits. ``save_cell(..., expected_etag=...)`` refuses to overwrite a file whose
content version has changed since it was read. The check and the rename are
not one atomic step: two writers in the same instant can still race; callers
that save from several threads serialise their saves.
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import re
import stat
import tempfile
from collections.abc import Callable, Mapping
from pathlib import Path
from types import MappingProxyType
from typing import Any, Literal

from posebridge.cell.model import (
    CELL_SCHEMA_VERSION,
    Cell,
    CellFileError,
    json_type_name,
    validate_cell,
)
from posebridge.cell.thresholds import QualityThresholds
from posebridge.messages import printable

__all__ = [
    "MAX_CELL_FILE_BYTES",
    "MIGRATIONS",
    "CellConflictError",
    "CellSaveError",
    "DuplicateJsonKeyError",
    "SaveFailure",
    "backup_path",
    "cell_etag",
    "cell_json",
    "load_cell",
    "migrate_cell_data",
    "parse_cell_json",
    "refuse_duplicate_keys",
    "remove_leftover_temporaries",
    "save_cell",
]

MAX_CELL_FILE_BYTES = 20_000_000
"""Largest cell file read (20 MB)."""

Migration = Callable[[dict[str, Any]], dict[str, Any]]


def _migrate_0_to_1(data: dict[str, Any]) -> dict[str, Any]:
    """Version 0 -> 1: identity on the content, sets ``schema_version`` to 1.

    Version 0 is the draft numbering of cell files written by hand before the
    format was frozen; its shape is the version-1 shape.
    """
    return {**data, "schema_version": 1}


MIGRATIONS: Mapping[int, Migration] = MappingProxyType({0: _migrate_0_to_1})
"""Migration steps: ``MIGRATIONS[v]`` turns version ``v`` data into version ``v + 1``."""


class CellConflictError(RuntimeError):
    """The cell file changed on disk since it was read (its content version differs).

    Attributes
    ----------
    path : str
    expected_etag : str
        The content version the caller read.
    actual_etag : str or None
        The content version on disk now; ``None`` if the file is gone or unreadable.
    """

    def __init__(self, path: str, expected_etag: str, actual_etag: str | None) -> None:
        self.path = path
        self.expected_etag = expected_etag
        self.actual_etag = actual_etag
        now = (
            "the file no longer exists or cannot be read as a cell"
            if actual_etag is None
            else f"it now has content version {actual_etag}"
        )
        super().__init__(
            f"{path}: changed on disk since it was read "
            f"(expected content version {expected_etag}, {now}); reload it and apply the edit again"
        )


SaveFailure = Literal[
    "no-space", "read-only-file-system", "folder-not-writable", "file-read-only", "io"
]
"""Why a save could not be made (:class:`CellSaveError`)."""


class CellSaveError(OSError):
    """A cell file could not be saved; the file on disk is unchanged.

    Attributes
    ----------
    path : str
        The cell file.
    failure : SaveFailure
        What happened: ``"no-space"`` (device full or quota), ``"read-only-file-system"``,
        ``"folder-not-writable"``, ``"file-read-only"`` (no owner write bit, or no write
        permission) or ``"io"`` (any other system error).
    """

    def __init__(self, message: str, *, path: str, failure: SaveFailure) -> None:
        super().__init__(message)
        self.path = path
        self.failure = failure

    def __str__(self) -> str:
        """Return the message alone, without the path and failure attributes."""
        return str(self.args[0])


_NO_SPACE = {errno.ENOSPC, errno.EDQUOT}
_NOT_PERMITTED = {errno.EACCES, errno.EPERM}


def _save_error(error: OSError, path: Path) -> CellSaveError:
    """Return the :class:`CellSaveError` of a failed write of cell file ``path``."""
    folder = path.parent
    unchanged = "nothing was written, the file is as it was"
    if error.errno in _NO_SPACE:
        return CellSaveError(
            f"{path}: cannot save, no space left on the device of {folder} ({unchanged}); "
            "free some space and save again",
            path=str(path),
            failure="no-space",
        )
    if error.errno == errno.EROFS:
        return CellSaveError(
            f"{path}: cannot save, the cell file's folder {folder} is on a read-only file "
            f"system ({unchanged})",
            path=str(path),
            failure="read-only-file-system",
        )
    if error.errno in _NOT_PERMITTED:
        return CellSaveError(
            f"{path}: cannot save, the cell file's folder {folder} is read-only for this "
            f"user ({unchanged}); allow writing in it and save again",
            path=str(path),
            failure="folder-not-writable",
        )
    return CellSaveError(
        f"{path}: cannot save: {error.strerror or error} ({unchanged})",
        path=str(path),
        failure="io",
    )


def _refuse_read_only(target: Path, mode: int, shown: Path) -> None:
    """Refuse to replace a file its user made read-only.

    No owner write bit (checked even for the superuser, who could write anyway) or no write
    permission for this process; a file on a read-only mount is reported as such.
    """
    try:
        read_only_mount = bool(os.statvfs(target.parent).f_flag & os.ST_RDONLY)
    except (OSError, AttributeError):  # no statvfs on this system
        read_only_mount = False
    if read_only_mount:
        raise _save_error(OSError(errno.EROFS, os.strerror(errno.EROFS)), shown)
    if not mode & stat.S_IWUSR or not os.access(target, os.W_OK):
        raise CellSaveError(
            f"{shown}: cannot save, the cell file is read-only (its permissions do not allow "
            "writing; nothing was written); make it writable (chmod u+w) to save",
            path=str(shown),
            failure="file-read-only",
        )


def _temporary_pattern(path: Path) -> re.Pattern[str]:
    """Names :func:`_write_atomic` gives temporary files of ``path`` (and of its backup)."""
    names = "|".join(re.escape(p.name) for p in (path, backup_path(path)))
    return re.compile(rf"\.(?:{names})\.[A-Za-z0-9_]{{8}}\.tmp")


def remove_leftover_temporaries(path: str | Path) -> list[Path]:
    """Delete temporary files left beside cell file ``path`` by saves that were killed.

    Only names that :func:`save_cell` makes (``.<name>.<8 characters>.tmp``, for the
    file and its ``.bak``) are touched. Returns the removed files; files that cannot be
    removed are left (and not returned).
    """
    target = Path(os.path.realpath(path))
    pattern = _temporary_pattern(target)
    removed = []
    try:
        candidates = list(target.parent.iterdir())
    except OSError:
        return []
    for candidate in candidates:
        if pattern.fullmatch(candidate.name) and candidate.is_file():
            try:
                candidate.unlink()
            except OSError:
                continue
            removed.append(candidate)
    return removed


def migrate_cell_data(
    data: dict[str, Any],
    *,
    migrations: Mapping[int, Migration] = MIGRATIONS,
    current: int = CELL_SCHEMA_VERSION,
) -> dict[str, Any]:
    """Bring parsed cell data of any known schema version to version ``current``.

    Applies ``migrations[v]`` for ``v`` from the file's version up to
    ``current - 1``. The input is not modified.

    Raises
    ------
    CellFileError
        Missing or non-integer ``schema_version``, a version newer than
        ``current``, or a version without a migration path.
    """
    if "schema_version" not in data:
        raise CellFileError(
            [f"schema_version: required field missing (this posebridge writes version {current})"]
        )
    version = data["schema_version"]
    if isinstance(version, bool) or not isinstance(version, int):
        raise CellFileError(
            [f"schema_version: expected an integer, got {json.dumps(version)[:40]}"]
        )
    if version > current:
        raise CellFileError(
            [
                f"schema_version: the file has cell schema version {version}, written by a newer "
                f"posebridge; this posebridge reads versions up to {current}: update posebridge to open it"
            ]
        )
    missing = [v for v in range(version, current) if v not in migrations]
    if version < 0 or missing:
        known = ", ".join(str(v) for v in sorted({*migrations, current}))
        raise CellFileError(
            [f"schema_version: unknown cell schema version {version}; known versions: {known}"]
        )
    for step in range(version, current):
        data = migrations[step](data)
    return data


class DuplicateJsonKeyError(ValueError):
    """A JSON object names the same key twice.

    RFC 8259 sec. 4: names SHOULD be unique; readers disagree on which value wins, so cell content
    refuses them.
    """


def refuse_duplicate_keys(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    """``object_pairs_hook`` for :func:`json.loads` that refuses a repeated key.

    Used for cell files and for every JSON request body of the server, so the
    same content is refused in both places.

    Raises
    ------
    DuplicateJsonKeyError
    """
    result: dict[str, Any] = {}
    for key, value in pairs:
        if key in result:
            raise DuplicateJsonKeyError(f"duplicate key {printable(key)!r} in one object")
        result[key] = value
    return result


def parse_cell_json(text: str, *, source: str = "") -> Cell:
    """Parse, migrate and validate the JSON text of a cell file.

    Raises
    ------
    CellFileError
        Not JSON (with line and column), not an object, unknown or newer
        schema version, or any validation problem (with its JSON path).
    """
    try:
        data = json.loads(text, object_pairs_hook=refuse_duplicate_keys)
    except json.JSONDecodeError as error:
        raise CellFileError(
            [f"line {error.lineno}, column {error.colno}: not valid JSON: {error.msg}"],
            source=source,
        ) from error
    except ValueError as error:
        raise CellFileError([f"not valid JSON: {error}"], source=source) from error
    except RecursionError as error:
        raise CellFileError(["not valid JSON: nested too deeply"], source=source) from error
    if not isinstance(data, dict):
        raise CellFileError(
            [f"expected a JSON object at the top level, got {json_type_name(data)}"], source=source
        )
    try:
        migrated = migrate_cell_data(data)
    except CellFileError as error:
        raise CellFileError(error.problems, source=source) from error
    return validate_cell(migrated, source=source)


def load_cell(path: str | Path) -> Cell:
    """Load a cell file (at most :data:`MAX_CELL_FILE_BYTES`); the file is never modified.

    Raises
    ------
    CellFileError
        Unreadable, too large, not UTF-8, not JSON, or invalid.
    """
    path = Path(path)
    try:
        with path.open("rb") as handle:
            raw = handle.read(MAX_CELL_FILE_BYTES + 1)
    except OSError as error:
        raise CellFileError(
            [f"cannot read: {error.strerror or error}"], source=str(path)
        ) from error
    if len(raw) > MAX_CELL_FILE_BYTES:
        raise CellFileError(
            [f"file is larger than {MAX_CELL_FILE_BYTES} bytes, the limit for cell files"],
            source=str(path),
        )
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        raise CellFileError(
            [f"not UTF-8 text ({error.reason} at byte {error.start})"], source=str(path)
        ) from error
    return parse_cell_json(text, source=str(path))


FILE_DECIMALS = 3
"""Decimals of every number a cell file holds: 0.001 mm for lengths, 0.001 deg for angles
(cell files hold mm, deg and speeds in mm/s or deg/s), so a drag leaves no float noise in a diff."""


def _rounded(value: Any) -> Any:
    """``value`` with every float rounded to :data:`FILE_DECIMALS` decimals (-0.0 written as 0.0)."""
    if isinstance(value, float):
        return round(value, FILE_DECIMALS) + 0.0
    if isinstance(value, dict):
        return {key: _rounded(item) for key, item in value.items()}
    if isinstance(value, list):
        return [_rounded(item) for item in value]
    return value


def _plain_data(cell: Cell) -> dict[str, Any]:
    """Return the cell as JSON data, numbers rounded as written.

    Rounded so the content version matches the file; thresholds left out while they are all the
    defaults, so a saved file follows later defaults unless the user set its own.
    """
    data: dict[str, Any] = _rounded(cell.model_dump(mode="json", exclude_none=True))
    if cell.thresholds == QualityThresholds():
        del data["thresholds"]
    else:
        data["thresholds"] = cell.thresholds.model_dump(mode="json", exclude_defaults=True)
    return data


# An indented array holding only numbers. JSON strings cannot hold a raw line
# break, so the leading "[\n" never matches inside a string.
_NUMBER_ARRAY = re.compile(r"\[\n\s+(-?[0-9][-+.0-9eE]*(?:,\n\s+-?[0-9][-+.0-9eE]*)*)\n\s*\]")


def cell_json(cell: Cell) -> str:
    """Return the text :func:`save_cell` writes.

    Indented JSON in model field order, unset optional fields left out, and
    arrays of numbers kept on one line (``"position_mm": [0.0, 0.0, 400.0]``).
    """
    text = json.dumps(_plain_data(cell), indent=2, ensure_ascii=False)
    return (
        _NUMBER_ARRAY.sub(lambda m: "[" + ", ".join(re.split(r",\s+", m.group(1))) + "]", text)
        + "\n"
    )


def cell_etag(cell: Cell) -> str:
    """Content version of a cell: SHA-256 (hex) of its canonical JSON.

    Canonical JSON: the validated content with keys sorted, no whitespace,
    UTF-8. Equal cells have equal content versions however the file is
    formatted.
    """
    canonical = json.dumps(
        _plain_data(cell), sort_keys=True, separators=(",", ":"), ensure_ascii=False
    )
    return hashlib.sha256(canonical.encode("utf-8")).hexdigest()


def backup_path(path: str | Path) -> Path:
    """Where :func:`save_cell` keeps the previous version: ``<name>.bak`` beside the file."""
    path = Path(path)
    return path.with_name(path.name + ".bak")


def _fsync_folder(folder: Path) -> None:
    """Make a rename in ``folder`` durable (POSIX; other systems have no folder fsync)."""
    if os.name != "posix":
        return
    descriptor = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(descriptor)
    finally:
        os.close(descriptor)


def _write_atomic(path: Path, data: bytes, mode: int) -> None:
    """Write ``data`` to ``path`` through a fsynced temporary file and a rename.

    On any failure the temporary file is removed and ``path`` is unchanged.
    """
    descriptor, temporary = tempfile.mkstemp(
        dir=path.parent, prefix=f".{path.name}.", suffix=".tmp"
    )
    try:
        with os.fdopen(descriptor, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(temporary, mode)
        os.replace(temporary, path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise
    _fsync_folder(path.parent)


def _etag_of_bytes(raw: bytes) -> str | None:
    """Content version of file bytes, ``None`` if they are not a valid cell."""
    try:
        return cell_etag(parse_cell_json(raw.decode("utf-8-sig")))
    except (CellFileError, UnicodeDecodeError):
        return None


def save_cell(cell: Cell, path: str | Path, *, expected_etag: str | None = None) -> str:
    """Save a cell atomically, keeping the previous file as ``<name>.bak``.

    Parameters
    ----------
    cell : Cell
        Validated again before writing; an invalid cell writes nothing.
    path : str or Path
    expected_etag : str, optional
        The content version the caller read. If given and the file on disk
        has another version (or is gone), nothing is written.

    Returns
    -------
    etag : str
        Content version of the saved cell.

    Raises
    ------
    CellFileError
        The cell is invalid.
    CellConflictError
        The file changed since ``expected_etag`` was read.
    CellSaveError
        The file is read-only, or it cannot be written (no space, read-only file
        system, folder not writable); the file on disk is then unchanged.
    """
    target = Path(os.path.realpath(path))
    shown = Path(path)
    checked = validate_cell(_plain_data(cell), source=str(path))
    data = cell_json(checked).encode("utf-8")
    try:
        previous: bytes | None = target.read_bytes()
        mode = target.stat().st_mode & 0o7777
    except FileNotFoundError:
        previous = None
        mode = 0o644
    except OSError as error:
        raise _save_error(error, shown) from error
    if expected_etag is not None:
        actual = None if previous is None else _etag_of_bytes(previous)
        if actual != expected_etag:
            raise CellConflictError(str(path), expected_etag, actual)
    if previous is not None:
        _refuse_read_only(target, mode, shown)
    try:
        if previous is not None:
            _write_atomic(backup_path(target), previous, mode & 0o777)
        _write_atomic(target, data, mode & 0o777)
    except OSError as error:
        raise _save_error(error, shown) from error
    return cell_etag(checked)
