"""An output folder that appears all at once, or not at all.

Every output of a run is written into a fresh hidden folder beside the target
(``.<name>.partial-XXXX``). Only when every file is complete does that folder take the target's
place: by one atomic exchange of the two folders where the system offers it (Linux
``renameat2`` with ``RENAME_EXCHANGE``), else by two renames. The earlier output is then removed.
A run that fails, is interrupted or is killed therefore leaves either the earlier complete output
untouched or, where there was none, nothing; never a mixture of files from two runs and never a
partial set.

Files in the target folder that are not outputs of this run (notes, other tools' files) are
carried over into the new folder as hard links (copies where links are not possible), so
``--overwrite`` replaces the outputs and leaves every other file as it was.

What a killed run leaves behind beside the target is cleaned up by the next run: a
``.partial-`` folder is removed, and an ``.old-`` folder (a run killed between the two renames)
is put back in place when the target is missing, else removed.
"""

from __future__ import annotations

import contextlib
import ctypes
import os
import secrets
import shutil
from collections.abc import Iterator
from pathlib import Path

from audit.errors import AuditError, OutputExistsError

_PARTIAL, _OLD = "partial", "old"
_RENAME_EXCHANGE = 2  # Linux, include/uapi/linux/fs.h
_AT_FDCWD = -100


@contextlib.contextmanager
def staged_folder(outdir: Path, *, overwrite: bool) -> Iterator[Path]:
    """A fresh folder beside ``outdir`` to write the outputs into; it becomes ``outdir`` when the block ends well.

    Raises
    ------
    OutputExistsError
        ``outdir`` is a file, or holds files and ``overwrite`` is not given.
    AuditError
        the folder cannot be created or moved into place (the message names it and why).
    """
    outdir = Path(outdir)
    if outdir.exists() and not outdir.is_dir():
        raise OutputExistsError(f"{outdir}: the output folder is a file; give a folder")
    try:
        outdir.parent.mkdir(parents=True, exist_ok=True)
        recover_leftovers(outdir)
    except OSError as error:
        raise AuditError(f"{outdir}: cannot create the output folder: {error.strerror or error}") from error
    _check_target(outdir, overwrite=overwrite)
    try:
        stage = _sibling(outdir, _PARTIAL)
        stage.mkdir()
    except OSError as error:
        raise AuditError(f"{outdir}: cannot create the output folder: {error.strerror or error}") from error
    try:
        yield stage
        _carry_over_other_files(outdir, stage)
        _swap_into_place(stage, outdir)
    finally:
        shutil.rmtree(stage, ignore_errors=True)


def recover_leftovers(outdir: Path) -> None:
    """Tidy what killed runs left beside ``outdir``: partial folders go; an earlier output comes back."""
    for leftover in sorted(outdir.parent.glob(f".{outdir.name}.{_OLD}-*")):
        if not outdir.exists():
            os.rename(leftover, outdir)
        else:
            shutil.rmtree(leftover, ignore_errors=True)
    for leftover in outdir.parent.glob(f".{outdir.name}.{_PARTIAL}-*"):
        shutil.rmtree(leftover, ignore_errors=True)


def _check_target(outdir: Path, *, overwrite: bool) -> None:
    if outdir.is_dir() and any(outdir.iterdir()) and not overwrite:
        raise OutputExistsError(
            f"{outdir}: the output folder already holds files; pass --overwrite to replace the audit's outputs "
            "(other files are left alone) or choose an empty folder"
        )


def _sibling(outdir: Path, kind: str) -> Path:
    return outdir.parent / f".{outdir.name}.{kind}-{secrets.token_hex(4)}"


def _carry_over_other_files(outdir: Path, stage: Path) -> None:
    """Hard-link into ``stage`` every entry of ``outdir`` this run did not write (copy where a link fails)."""
    if not outdir.is_dir():
        return
    for entry in outdir.iterdir():
        target = stage / entry.name
        if target.exists() or target.is_symlink():
            continue  # an output of this run replaces it
        if entry.is_dir() and not entry.is_symlink():
            shutil.copytree(entry, target, symlinks=True, copy_function=_link_or_copy)
        else:
            _link_or_copy(entry, target)


def _link_or_copy(source: str | os.PathLike[str], target: str | os.PathLike[str]) -> None:
    try:
        os.link(source, target, follow_symlinks=False)
    except OSError:
        shutil.copy2(source, target, follow_symlinks=False)


def _swap_into_place(stage: Path, outdir: Path) -> None:
    """Put ``stage`` where ``outdir`` is; ``stage`` then holds the earlier output (or nothing) for removal."""
    try:
        if not outdir.exists():
            os.rename(stage, outdir)
            return
        if _exchange(stage, outdir):
            return
        old = _sibling(outdir, _OLD)
        os.rename(outdir, old)  # a kill between these two renames is repaired by recover_leftovers
        os.rename(stage, outdir)
        os.rename(old, stage)
    except OSError as error:
        raise AuditError(f"{outdir}: cannot move the outputs into place: {error.strerror or error}") from error


def _exchange(first: Path, second: Path) -> bool:
    """Swap two paths in one atomic step (Linux ``renameat2`` with ``RENAME_EXCHANGE``); False where not offered."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    result = renameat2(_AT_FDCWD, os.fsencode(first), _AT_FDCWD, os.fsencode(second), _RENAME_EXCHANGE)
    return bool(result == 0)
