"""Writing files: atomically, one file or a set of files, respecting the umask.

* :func:`write_text_atomic` writes one file: a reader sees the old file or the new one,
  never half of one.
* :func:`write_set` writes several files as one set (a record and its reports): every file
  is written into a temporary folder next to the target first and moved into place only
  when all of them were written, so a failure leaves nothing new.
* :func:`check_output_folder` and :func:`check_output_file` find an output path that cannot
  be written before any work is done.

New files get the permissions the process's umask allows (``0o666 & ~umask``), like any
file a program creates; nothing is made owner-only unless a caller says why (private keys,
see :mod:`forecastaudit.record.signing`).
"""

from __future__ import annotations

import os
import secrets
import shutil
from collections.abc import Mapping
from pathlib import Path

from forecastaudit.errors import ForecastAuditError

__all__ = [
    "OutputError",
    "check_output_file",
    "check_output_folder",
    "write_set",
    "write_text_atomic",
]


class OutputError(ForecastAuditError, OSError):
    """An output path cannot be written (a file where a folder is needed, no permission)."""


def _umask() -> int:
    # os.umask can only be read by setting it; put it back at once. /proc is tried first
    # because it reads the value without changing it (Linux 4.7 and later).
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("Umask:"):
                return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _new_file(folder: Path, name: str, text: str) -> Path:
    """Write ``text`` to a new file ``folder/name`` (mode 0o666 less the umask), synced."""
    path = folder / name
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
    with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as handle:
        handle.write(text)
        handle.flush()
        os.fsync(handle.fileno())
    return path


def write_text_atomic(path: str | os.PathLike[str], text: str) -> Path:
    """Write ``text`` to ``path`` atomically: the file is either the old one or the new one."""
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    tmp_name = f".{target.name[:100]}.{secrets.token_hex(6)}.tmp"
    tmp = target.parent / tmp_name
    try:
        _new_file(target.parent, tmp_name, text)
        os.replace(tmp, target)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return target


def _nearest_existing(path: Path) -> Path:
    probe = path
    while not probe.exists() and probe != probe.parent:
        probe = probe.parent
    return probe


def check_output_folder(path: str | os.PathLike[str], option: str = "--out") -> Path:
    """Check that ``path`` is, or can be created as, a writable folder; nothing is created.

    Raises
    ------
    OutputError
        When ``path`` (or a parent) is a file, or the folder that would hold it is not
        writable.
    """
    target = Path(path)
    existing = _nearest_existing(target.absolute())
    if not existing.is_dir():
        what = "is a file" if existing == target.absolute() else f"is below the file {existing}"
        raise OutputError(
            f"{option} {target} {what}; give a folder for the outputs (a new or existing one)."
        )
    if not os.access(existing, os.W_OK | os.X_OK):
        raise OutputError(
            f"{option} {target}: the folder {existing} is not writable by this user; choose "
            "another folder or ask for write permission."
        )
    return target


def check_output_file(path: str | os.PathLike[str], option: str = "--out") -> Path:
    """Check that ``path`` can be written as a file; nothing is created.

    Raises
    ------
    OutputError
        When ``path`` is a folder, or its folder is a file or not writable.
    """
    target = Path(path)
    if target.is_dir():
        raise OutputError(f"{option} {target} is a folder; give a file name to write to.")
    check_output_folder(target.parent if str(target.parent) else Path("."), option)
    return target


def write_set(folder: str | os.PathLike[str], texts: Mapping[str, str]) -> list[Path]:
    """Write several files into ``folder`` as one set: all of them, or none.

    The files are written into a temporary folder next to the target (``folder`` itself when
    it exists, else its parent), then moved into place. A new ``folder`` appears in one
    rename; into an existing one, each file is moved in turn and, should a move fail, the
    files moved so far are put back as they were. Files already in the folder and not named
    in ``texts`` are left alone.

    Returns
    -------
    list of Path
        The files written, in the order of ``texts``.

    Raises
    ------
    OutputError
        When the folder cannot be written (checked first, see :func:`check_output_folder`).
    OSError
        When writing fails part-way; nothing new is left behind.
    """
    target = check_output_folder(folder)
    for name in texts:
        if Path(name).name != name or name.startswith("."):
            raise OutputError(f"{name!r} is not a plain file name.")
    fresh = not target.exists()
    holder = target.parent if fresh else target
    holder.mkdir(parents=True, exist_ok=True)
    staging = holder / f".{target.name[:60]}.{secrets.token_hex(6)}.partial"
    staging.mkdir(mode=0o777)  # the umask applies, as to any folder created
    try:
        for name, text in texts.items():
            _new_file(staging, name, text)
        if fresh:
            os.replace(staging, target)
            return [target / name for name in texts]
        _move_into(staging, target, list(texts))
    finally:
        if staging.exists():
            shutil.rmtree(staging, ignore_errors=True)
    return [target / name for name in texts]


def _move_into(staging: Path, target: Path, names: list[str]) -> None:
    """Move ``names`` from ``staging`` into ``target``, undoing every move if one fails."""
    backups = staging / ".previous"
    backups.mkdir()
    done: list[str] = []
    try:
        for name in names:
            if (target / name).exists():
                os.replace(target / name, backups / name)
            done.append(name)
            os.replace(staging / name, target / name)
    except BaseException:
        for name in reversed(done):
            if (backups / name).exists():
                os.replace(backups / name, target / name)
            else:
                (target / name).unlink(missing_ok=True)
        raise
