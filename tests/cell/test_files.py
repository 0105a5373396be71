"""Cell files: loading, migration, atomic save with backup, content versions.

Messages and the file format are our own contract (README, "Cell files").
Atomic saving (temp file, fsync, rename) is common practice, no source.
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
from pathlib import Path
from typing import Any

import pytest

from posebridge.cell import files
from posebridge.cell.files import (
    CellConflictError,
    CellSaveError,
    backup_path,
    cell_etag,
    cell_json,
    load_cell,
    migrate_cell_data,
    parse_cell_json,
    save_cell,
)
from posebridge.cell.model import CellFileError, validate_cell

FIXTURES = Path(__file__).resolve().parent.parent / "fixtures" / "cells"


def small_cell_data() -> dict[str, Any]:
    return {
        "schema_version": 1,
        "robot": {"name": "pb-arm6"},
        "fixtures": [
            {
                "name": "table",
                "shape": "box",
                "position_mm": [800, 0, 400],
                "size_mm": [600, 600, 800],
            }
        ],
        "targets": [{"name": "pick", "fixture": "table", "position_mm": [0, 0, 440]}],
        "notes": "keep [1, 2] and {braces} as typed",
    }


def write_cell(path: Path, data: dict[str, Any], *, indent: int | None = 2) -> bytes:
    raw = json.dumps(data, indent=indent).encode("utf-8")
    path.write_bytes(raw)
    return raw


def file_problems(path: Path) -> list[str]:
    with pytest.raises(CellFileError) as caught:
        load_cell(path)
    assert caught.value.source == str(path)
    return caught.value.problems


def test_save_then_load_round_trip(tmp_path: Path) -> None:
    cell = validate_cell(small_cell_data())
    path = tmp_path / "cell.json"
    etag = save_cell(cell, path)
    loaded = load_cell(path)
    # our own contract: saving and loading gives back the same cell and content version
    assert loaded == cell
    assert etag == cell_etag(loaded)
    assert loaded.notes == "keep [1, 2] and {braces} as typed"


def test_saved_text_is_readable_json(tmp_path: Path) -> None:
    cell = validate_cell(small_cell_data())
    text = cell_json(cell)
    # our own contract: number arrays on one line, unset optional fields left out
    assert '"position_mm": [800.0, 0.0, 400.0]' in text
    assert '"parent"' not in text
    assert text.endswith("}\n")
    # the standard library's JSON reader (independent parser) reads the same content, default
    # thresholds left out (our own contract)
    expected = cell.model_dump(mode="json", exclude_none=True)
    del expected["thresholds"]
    assert json.loads(text) == expected


def test_saved_numbers_are_rounded_to_a_thousandth(tmp_path: Path) -> None:
    data = small_cell_data()
    data["fixtures"][0]["position_mm"] = [800.00000000001, -1e-12, 400.12349]
    data["fixtures"][0]["rpy_deg"] = [0.0, 0.0, 29.999999999996]
    cell = validate_cell(data)
    path = tmp_path / "cell.json"
    etag = save_cell(cell, path)
    # our own contract (issue: no float noise in diffs): 0.001 mm and 0.001 deg, no -0.0
    text = path.read_text()
    assert '"position_mm": [800.0, 0.0, 400.123]' in text
    assert '"rpy_deg": [0.0, 0.0, 30.0]' in text
    # the content version is that of the file as written, so a reload is not a conflict
    assert etag == cell_etag(load_cell(path)) == cell_etag(cell)


def test_etag_is_sha256_of_canonical_json_and_ignores_formatting(tmp_path: Path) -> None:
    data = small_cell_data()
    cell = validate_cell(data)
    content = cell.model_dump(mode="json", exclude_none=True)
    del content["thresholds"]  # default thresholds are not written, so not content
    canonical = json.dumps(
        content,
        sort_keys=True,
        separators=(",", ":"),
        ensure_ascii=False,
    )
    # our own contract: the content version is SHA-256 (hashlib) of the canonical JSON
    assert cell_etag(cell) == hashlib.sha256(canonical.encode("utf-8")).hexdigest()
    compact = tmp_path / "compact.json"
    write_cell(compact, data, indent=None)
    wide = tmp_path / "wide.json"
    write_cell(wide, data, indent=8)
    # our own contract: formatting is not content
    assert cell_etag(load_cell(compact)) == cell_etag(load_cell(wide))
    data["targets"][0]["position_mm"] = [0, 0, 441]
    assert cell_etag(validate_cell(data)) != cell_etag(cell)


def test_loading_never_changes_the_file(tmp_path: Path) -> None:
    path = tmp_path / "old.json"
    raw = (FIXTURES / "version-0.json").read_bytes()
    path.write_bytes(raw)
    os.utime(path, ns=(1_600_000_000_000_000_000, 1_600_000_000_000_000_000))
    before = path.stat()
    cell = load_cell(path)
    after = path.stat()
    # our own contract: an old file is migrated in memory only
    assert cell.schema_version == 1
    assert path.read_bytes() == raw
    assert after.st_mtime_ns == before.st_mtime_ns
    assert after.st_size == before.st_size
    assert sorted(p.name for p in tmp_path.iterdir()) == ["old.json"]


def test_version_0_is_migrated_by_the_identity_step() -> None:
    data = json.loads((FIXTURES / "version-0.json").read_text())
    migrated = migrate_cell_data(data)
    # our own contract: 0 -> 1 changes nothing but the version number
    assert migrated == {**data, "schema_version": 1}
    assert data["schema_version"] == 0  # the input is not modified
    assert load_cell(FIXTURES / "version-0.json").fixtures[0].name == "table"


def test_migration_steps_run_in_order() -> None:
    def step(version: int) -> Any:
        def migrate(data: dict[str, Any]) -> dict[str, Any]:
            return {**data, "schema_version": version + 1, "log": [*data["log"], version]}

        return migrate

    registry = {0: step(0), 1: step(1), 2: step(2)}
    # our own contract: steps v -> v+1 are chained up to the current version
    assert migrate_cell_data({"schema_version": 1, "log": []}, migrations=registry, current=3) == {
        "schema_version": 3,
        "log": [1, 2],
    }
    with pytest.raises(CellFileError) as caught:
        migrate_cell_data({"schema_version": 0, "log": []}, migrations={0: step(0)}, current=3)
    assert caught.value.problems == [
        "schema_version: unknown cell schema version 0; known versions: 0, 3"
    ]


def test_newer_version_is_refused_naming_both_versions() -> None:
    # our own contract: name the file's version and the newest this posebridge reads
    assert file_problems(FIXTURES / "newer-version.json") == [
        "schema_version: the file has cell schema version 2, written by a newer posebridge; "
        "this posebridge reads versions up to 1: update posebridge to open it"
    ]


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        (
            '{"robot": {"name": "pb-arm6"}}',
            "schema_version: required field missing (this posebridge writes version 1)",
        ),
        ('{"schema_version": "1"}', 'schema_version: expected an integer, got "1"'),
        ('{"schema_version": true}', "schema_version: expected an integer, got true"),
        (
            '{"schema_version": -1}',
            "schema_version: unknown cell schema version -1; known versions: 0, 1",
        ),
    ],
)
def test_unknown_schema_versions(text: str, expected: str) -> None:
    with pytest.raises(CellFileError) as caught:
        parse_cell_json(text)
    # our own contract
    assert caught.value.problems == [expected]


def test_not_json_reports_line_and_column() -> None:
    # The fixture lacks the comma after line 2; the next token starts at line 3,
    # column 3 (counted by hand in the file: two spaces, then the quote).
    assert file_problems(FIXTURES / "missing-comma.json") == [
        "line 3, column 3: not valid JSON: Expecting ',' delimiter"
    ]


def test_not_an_object() -> None:
    # our own contract
    assert file_problems(FIXTURES / "top-level-array.json") == [
        "expected a JSON object at the top level, got array"
    ]


def test_duplicate_keys_are_refused() -> None:
    # common practice, no source: a repeated key would silently drop data
    assert file_problems(FIXTURES / "duplicate-key.json") == [
        "not valid JSON: duplicate key 'robot' in one object"
    ]


def test_bad_values_are_listed_with_json_paths() -> None:
    # our own contract; NaN is read by the JSON parser and refused by validation
    assert file_problems(FIXTURES / "bad-values.json") == [
        "fixtures[0].size_mm[1]: must be > 0",
        "fixtures[1].position_mm[2]: must be a finite number, got nan",
    ]


def test_not_utf8(tmp_path: Path) -> None:
    path = tmp_path / "latin1.json"
    path.write_bytes(b'{"title": "caf\xe9"}')
    # our own contract; byte 14 is the 0xE9 (counted in the literal above)
    assert file_problems(path) == ["not UTF-8 text (invalid continuation byte at byte 14)"]


def test_size_cap(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path = tmp_path / "big.json"
    write_cell(path, small_cell_data())
    monkeypatch.setattr(files, "MAX_CELL_FILE_BYTES", 100)
    # our own contract: files above the cap are not read
    assert file_problems(path) == ["file is larger than 100 bytes, the limit for cell files"]


def test_missing_file(tmp_path: Path) -> None:
    # our own contract
    assert file_problems(tmp_path / "absent.json") == ["cannot read: No such file or directory"]


def test_backup_keeps_the_previous_version(tmp_path: Path) -> None:
    path = tmp_path / "cell.json"
    first = validate_cell(small_cell_data())
    save_cell(first, path)
    first_bytes = path.read_bytes()
    # our own contract: no backup before there is a previous version
    assert not backup_path(path).exists()
    data = small_cell_data()
    data["title"] = "second"
    save_cell(validate_cell(data), path)
    # our own contract: <name>.bak holds the version before the last save
    assert backup_path(path) == tmp_path / "cell.json.bak"
    assert backup_path(path).read_bytes() == first_bytes
    assert load_cell(path).title == "second"


def test_crash_at_rename_keeps_the_original(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / "cell.json"
    original = write_cell(path, small_cell_data())
    real_replace = os.replace

    def failing_replace(source: Any, destination: Any) -> None:
        if Path(destination) == path:
            raise OSError("simulated crash")
        real_replace(source, destination)

    monkeypatch.setattr(os, "replace", failing_replace)
    data = small_cell_data()
    data["title"] = "never written"
    with pytest.raises(OSError, match="simulated crash"):
        save_cell(validate_cell(data), path)
    # common practice, no source: the target is untouched and no temporary file is left
    assert path.read_bytes() == original
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cell.json", "cell.json.bak"]
    assert backup_path(path).read_bytes() == original


def test_crash_while_writing_leaves_no_temporary_file(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / "cell.json"

    def failing_fsync(descriptor: int) -> None:
        raise OSError("disk full")

    monkeypatch.setattr(os, "fsync", failing_fsync)
    with pytest.raises(OSError, match="disk full"):
        save_cell(validate_cell(small_cell_data()), path)
    # common practice, no source: nothing half-written is left behind
    assert list(tmp_path.iterdir()) == []


def test_conflict_when_file_changed_since_read(tmp_path: Path) -> None:
    path = tmp_path / "cell.json"
    write_cell(path, small_cell_data())
    mine = load_cell(path)
    etag_read = cell_etag(mine)
    theirs = small_cell_data()
    theirs["title"] = "edited elsewhere"
    their_etag = save_cell(validate_cell(theirs), path)
    on_disk = path.read_bytes()
    with pytest.raises(CellConflictError) as caught:
        save_cell(mine, path, expected_etag=etag_read)
    # our own contract: nothing is written and both versions are named
    assert path.read_bytes() == on_disk
    assert caught.value.expected_etag == etag_read
    assert caught.value.actual_etag == their_etag
    assert str(caught.value) == (
        f"{path}: changed on disk since it was read (expected content version {etag_read}, "
        f"it now has content version {their_etag}); reload it and apply the edit again"
    )
    # with the current content version the save goes through
    save_cell(mine, path, expected_etag=their_etag)
    assert load_cell(path).title == ""


def test_conflict_when_file_was_deleted(tmp_path: Path) -> None:
    path = tmp_path / "cell.json"
    cell = validate_cell(small_cell_data())
    etag = save_cell(cell, path)
    path.unlink()
    with pytest.raises(CellConflictError) as caught:
        save_cell(cell, path, expected_etag=etag)
    # our own contract
    assert caught.value.actual_etag is None
    assert not path.exists()


def test_reformatting_on_disk_is_not_a_conflict(tmp_path: Path) -> None:
    path = tmp_path / "cell.json"
    data = small_cell_data()
    write_cell(path, data, indent=None)
    etag = cell_etag(load_cell(path))
    write_cell(path, data, indent=6)
    # our own contract: the content version ignores formatting
    save_cell(validate_cell(data), path, expected_etag=etag)
    assert load_cell(path) == validate_cell(data)


def test_invalid_cell_is_not_written(tmp_path: Path) -> None:
    path = tmp_path / "cell.json"
    cell = validate_cell(small_cell_data())
    cell.targets[0].fixture = "nowhere"  # edited after validation
    with pytest.raises(CellFileError) as caught:
        save_cell(cell, path)
    # our own contract: the cell is validated again before writing
    assert caught.value.problems == ["targets[0].fixture: unknown fixture 'nowhere'"]
    assert list(tmp_path.iterdir()) == []


def test_file_mode_is_kept(tmp_path: Path) -> None:
    path = tmp_path / "cell.json"
    write_cell(path, small_cell_data())
    path.chmod(0o600)
    save_cell(validate_cell(small_cell_data()), path)
    # common practice, no source: replacing a file keeps its permissions
    assert path.stat().st_mode & 0o777 == 0o600


def test_symbolic_link_is_followed(tmp_path: Path) -> None:
    real = tmp_path / "real.json"
    write_cell(real, small_cell_data())
    link = tmp_path / "link.json"
    link.symlink_to(real)
    data = small_cell_data()
    data["title"] = "through the link"
    save_cell(validate_cell(data), link)
    # common practice, no source: saving through a link updates the file it points to
    assert link.is_symlink()
    assert load_cell(real).title == "through the link"


def _saved_elsewhere(path: Path) -> Any:
    data = small_cell_data()
    data["title"] = "not saved"
    return validate_cell(data)


def test_read_only_file_is_not_replaced(tmp_path: Path) -> None:
    # as root too: the owner write bit is checked, not only whether a write would succeed
    path = tmp_path / "cell.json"
    original = write_cell(path, small_cell_data())
    path.chmod(0o444)
    with pytest.raises(CellSaveError) as caught:
        save_cell(_saved_elsewhere(path), path)
    assert caught.value.failure == "file-read-only"
    assert str(caught.value) == (
        f"{path}: cannot save, the cell file is read-only (its permissions do not allow "
        "writing; nothing was written); make it writable (chmod u+w) to save"
    )
    assert path.read_bytes() == original
    assert path.stat().st_mode & 0o777 == 0o444
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cell.json"]


@pytest.mark.parametrize(
    ("code", "failure", "words"),
    [
        (errno.ENOSPC, "no-space", "no space left on the device of"),
        (errno.EDQUOT, "no-space", "no space left on the device of"),
        (errno.EROFS, "read-only-file-system", "is on a read-only file system"),
        (errno.EACCES, "folder-not-writable", "is read-only for this user"),
    ],
)
def test_write_failures_say_what_happened(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, code: int, failure: str, words: str
) -> None:
    path = tmp_path / "cell.json"
    original = write_cell(path, small_cell_data())

    def failing_fsync(descriptor: int) -> None:
        raise OSError(code, os.strerror(code))

    monkeypatch.setattr(os, "fsync", failing_fsync)
    with pytest.raises(CellSaveError) as caught:
        save_cell(_saved_elsewhere(path), path)
    assert caught.value.failure == failure
    assert str(caught.value).startswith(f"{path}: cannot save")
    assert words in str(caught.value)
    assert str(tmp_path) in str(caught.value)
    # common practice, no source: nothing half-written, no temporary file left
    assert path.read_bytes() == original
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cell.json"]


def test_leftover_temporaries_are_removed(tmp_path: Path) -> None:
    path = tmp_path / "cell.json"
    write_cell(path, small_cell_data())
    ours = [tmp_path / ".cell.json.a1b2_c3d.tmp", tmp_path / ".cell.json.bak.zz99yy88.tmp"]
    others = [
        tmp_path / ".other.json.a1b2c3d4.tmp",
        tmp_path / ".cell.json.short.tmp",
        tmp_path / "cell.json.a1b2c3d4.tmp",
        tmp_path / "notes.tmp",
    ]
    for file in ours + others:
        file.write_text("{")
    assert sorted(files.remove_leftover_temporaries(path)) == sorted(ours)
    assert sorted(tmp_path.iterdir()) == sorted([path, *others])


def test_thresholds_are_saved_only_when_set(tmp_path: Path) -> None:
    plain = validate_cell(small_cell_data())
    # our own contract: default thresholds stay out of the file (it follows later defaults)
    assert '"thresholds"' not in cell_json(plain)
    data = small_cell_data()
    data["thresholds"] = {"clearance_mm": 40.0}
    own = validate_cell(data)
    path = tmp_path / "cell.json"
    save_cell(own, path)
    # our own contract: only the fields the user set are written, and they load back
    assert json.loads(path.read_text())["thresholds"] == {"clearance_mm": 40.0}
    assert load_cell(path).thresholds == own.thresholds
