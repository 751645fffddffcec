"""Atomic text writes: content, refusal to overwrite, ordinary file permissions."""
import os
import stat

import pytest

from retrieve.errors import InputFileError
from retrieve.observations.writers import atomic_write_text


def test_written_file_has_umask_permissions_and_content(tmp_path):
    old = os.umask(0o022)
    try:
        target = tmp_path / "out.txt"
        atomic_write_text(target, "line\n")
    finally:
        os.umask(old)
    assert target.read_text() == "line\n"
    # a plain open() under umask 022 gives 0644 (common practice, no source)
    assert stat.S_IMODE(target.stat().st_mode) == 0o644
    assert [p.name for p in tmp_path.iterdir()] == ["out.txt"]


def test_existing_file_is_kept_without_overwrite(tmp_path):
    target = tmp_path / "out.txt"
    target.write_text("old")
    with pytest.raises(InputFileError, match="file exists"):
        atomic_write_text(target, "new")
    assert target.read_text() == "old"
