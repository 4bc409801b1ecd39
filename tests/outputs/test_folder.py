"""Outputs appear all at once: staging beside the target, the swap, foreign files, leftovers."""

from pathlib import Path

import pytest

from audit.errors import OutputExistsError
from audit.outputs.folder import recover_leftovers, staged_folder


def test_a_new_folder_appears_only_when_the_block_ends_well(tmp_path: Path) -> None:
    out = tmp_path / "out"
    with staged_folder(out, overwrite=False) as stage:
        (stage / "a.txt").write_text("new", encoding="utf-8")
        assert not out.exists()  # nothing is visible while the files are written
        assert stage.parent == tmp_path
        assert stage.name.startswith(".out.partial-")
    assert sorted(p.name for p in out.iterdir()) == ["a.txt"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_a_failing_block_leaves_the_earlier_output_untouched(tmp_path: Path) -> None:
    out = tmp_path / "out"
    out.mkdir()
    (out / "a.txt").write_text("old a", encoding="utf-8")
    (out / "b.txt").write_text("old b", encoding="utf-8")
    def write_and_fail() -> None:
        with staged_folder(out, overwrite=True) as stage:
            (stage / "a.txt").write_text("new a", encoding="utf-8")
            raise RuntimeError("the disk fell off")

    with pytest.raises(RuntimeError, match="the disk fell off"):
        write_and_fail()
    assert {p.name: p.read_text(encoding="utf-8") for p in out.iterdir()} == {"a.txt": "old a", "b.txt": "old b"}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_overwrite_replaces_outputs_and_carries_other_files_over(tmp_path: Path) -> None:
    out = tmp_path / "out"
    (out / "notes").mkdir(parents=True)
    (out / "a.txt").write_text("old a", encoding="utf-8")
    (out / "readme.md").write_text("the user's own note", encoding="utf-8")
    (out / "notes" / "n.txt").write_text("more notes", encoding="utf-8")
    inode = (out / "readme.md").stat().st_ino
    with staged_folder(out, overwrite=True) as stage:
        (stage / "a.txt").write_text("new a", encoding="utf-8")
    assert (out / "a.txt").read_text(encoding="utf-8") == "new a"
    assert (out / "readme.md").read_text(encoding="utf-8") == "the user's own note"
    assert (out / "readme.md").stat().st_ino == inode  # the same file, linked, not a copy
    assert (out / "notes" / "n.txt").read_text(encoding="utf-8") == "more notes"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_a_folder_with_files_is_refused_without_overwrite(tmp_path: Path) -> None:
    out = tmp_path / "out"
    out.mkdir()
    (out / "x").write_text("x", encoding="utf-8")
    with pytest.raises(OutputExistsError, match="already holds files"), staged_folder(out, overwrite=False):
        pass
    (tmp_path / "file").write_text("f", encoding="utf-8")
    with pytest.raises(OutputExistsError, match="is a file"), staged_folder(tmp_path / "file", overwrite=True):
        pass


def test_what_killed_runs_left_is_tidied_and_an_earlier_output_restored(tmp_path: Path) -> None:
    out = tmp_path / "out"
    # a run killed while writing left a partial folder; one killed between the two renames of a
    # swap left the earlier output aside, and no target
    (tmp_path / ".out.partial-0a1b2c3d").mkdir()
    (tmp_path / ".out.partial-0a1b2c3d" / "audit.gpkg").write_text("half", encoding="utf-8")
    (tmp_path / ".out.old-4e5f6a7b").mkdir()
    (tmp_path / ".out.old-4e5f6a7b" / "audit.gpkg").write_text("complete", encoding="utf-8")
    recover_leftovers(out)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]
    assert (out / "audit.gpkg").read_text(encoding="utf-8") == "complete"
