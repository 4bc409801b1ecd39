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
import errno
import os
import secrets
import shutil
from collections.abc import Iterable, Iterator
from pathlib import Path

from audit.errors import AuditError, OutputExistsError

_PARTIAL, _OLD = "partial", "old"
_RENAME_EXCHANGE = 2  # Linux, include/uapi/linux/fs.h
_AT_FDCWD = -100


@contextlib.contextmanager
def staged_folder(outdir: Path, *, overwrite: bool, keep: Iterable[Path] = (), names: Iterable[str] = ()) -> Iterator[Path]:
    """A fresh folder beside ``outdir`` to write the outputs into; it becomes ``outdir`` when the block ends well.

    ``names`` are the files the block will write, listed in the message when ``outdir`` already
    holds files and ``overwrite`` is not given.

    ``keep`` are files no output may replace (the run's inputs): where the block wrote a file
    under the name of one of them inside ``outdir``, nothing is moved into place.

    Raises
    ------
    OutputExistsError
        ``outdir`` is a file, or holds files and ``overwrite`` is not given, or an output would
        replace a file of ``keep``.
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
        raise AuditError(f"{outdir}: cannot create the output folder: {problem(error, outdir.parent)}") from error
    _check_target(outdir, overwrite=overwrite, names=tuple(names))
    try:
        stage = _sibling(outdir, _PARTIAL)
        stage.mkdir()
    except OSError as error:
        raise AuditError(f"{outdir}: cannot create the output folder: {problem(error, outdir.parent)}") from error
    try:
        yield stage
        _refuse_replacing(stage, outdir, keep)
        try:
            _carry_over_other_files(outdir, stage)
        except OSError as error:
            raise AuditError(f"{outdir}: cannot carry its other files over: {problem(error, stage)}") from error
        _swap_into_place(stage, outdir)
    finally:
        shutil.rmtree(stage, ignore_errors=True)


_FULL_BELOW_BYTES = 1 << 20  # a file system with less free space than this after a failed write is full [bytes]
_FULL_WORDS = ("no space left", "disk is full", "database or disk is full")


def disk_full(error: BaseException, folder: Path) -> bool:
    """Whether a failed write failed for want of space: the error says so, or ``folder``'s file system has under 1 MiB free.

    SQLite (inside GDAL) often reports a full disk only by what failed next ("cannot rollback -
    no transaction is active", "no such table"), so the free space is asked as well.
    """
    if isinstance(error, OSError) and error.errno in (errno.ENOSPC, errno.EDQUOT):
        return True
    if any(words in str(error).lower() for words in _FULL_WORDS):
        return True
    try:
        return shutil.disk_usage(folder).free < _FULL_BELOW_BYTES
    except OSError:
        return False


def problem(error: BaseException, folder: Path) -> str:
    """What went wrong in a write, for a message: "the disk is full", else the library's first line (at most 300 characters)."""
    if disk_full(error, folder):
        said = getattr(error, "strerror", None)
        return f"the disk is full{f' ({said})' if said else ''}; free some space and run again"
    lines = str(error).strip().splitlines()
    text = getattr(error, "strerror", None) or (lines[0] if lines else type(error).__name__)
    return text if len(text) <= 300 else text[:297] + "..."


def _refuse_replacing(stage: Path, outdir: Path, keep: Iterable[Path]) -> None:
    """Refuse to move ``stage`` into place where a file written there would take the place of one of ``keep``."""
    for path in keep:
        try:
            inside = Path(path).resolve().relative_to(outdir.resolve())
        except (ValueError, OSError, RuntimeError):
            continue  # not inside the output folder
        if (stage / inside).exists():
            raise OutputExistsError(f"{outdir / inside}: this output file would replace the input {path}; choose another output folder")


def recover_leftovers(outdir: Path) -> None:
    """Tidy what killed runs left beside ``outdir``: partial folders go; an earlier output comes back."""
    for leftover in sorted(outdir.parent.glob(f".{outdir.name}.{_OLD}-*")):
        if not outdir.exists():
            os.rename(leftover, outdir)
        else:
            shutil.rmtree(leftover, ignore_errors=True)
    for leftover in outdir.parent.glob(f".{outdir.name}.{_PARTIAL}-*"):
        shutil.rmtree(leftover, ignore_errors=True)


def _check_target(outdir: Path, *, overwrite: bool, names: tuple[str, ...]) -> None:
    if outdir.is_dir() and any(outdir.iterdir()) and not overwrite:
        listed = f" ({', '.join(names)})" if names else ""
        raise OutputExistsError(
            f"{outdir}: the output folder already holds files; pass --overwrite to replace the outputs{listed} "
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
        raise AuditError(f"{outdir}: cannot move the outputs into place: {problem(error, outdir.parent)}") from error


def _exchange(first: Path, second: Path) -> bool:
    """Swap two paths in one atomic step (Linux ``renameat2`` with ``RENAME_EXCHANGE``); False where not offered."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    result = renameat2(_AT_FDCWD, os.fsencode(first), _AT_FDCWD, os.fsencode(second), _RENAME_EXCHANGE)
    return bool(result == 0)
