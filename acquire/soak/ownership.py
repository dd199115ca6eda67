"""Who may own what the daemon trusts: its spool, job files, folders and commands.

``sweepd serve`` runs commands named in job files (alarm commands) and writes into the
folders they name. A file that another user owns or may write is a way to run code or
plant data as the daemon's user, so each of these must be owned by the daemon's user
(root may own executables and the folders above them) and must not be writable by group
or others. Symbolic links are judged by what they point to, after the link itself is
checked the same way. The rule follows common practice for daemons' spool folders; it is
not taken from a standard.
"""

from __future__ import annotations

import os
import shutil
import stat
from pathlib import Path

from drivers.errors import SweepdError


class OwnershipError(SweepdError):
    """A file or folder the daemon would trust is owned or writable by someone else."""


def one_line_path(path: Path) -> str:
    """A path as one line of text (a newline in a name never splits a message)."""
    return str(path).encode("unicode_escape").decode("ascii")


def _owner_text(uid: int) -> str:
    try:
        import pwd

        return f"{pwd.getpwuid(uid).pw_name} (uid {uid})"
    except (KeyError, ImportError):
        return f"uid {uid}"


def check_private(path: Path, what: str, *, root_ok: bool = False) -> None:
    """Refuse ``path`` unless this process's user owns it and nobody else may write it.

    ``root_ok`` also accepts root as the owner (system executables, ``/usr/bin``).
    A missing path is not checked (the caller creates it with its own mode).
    """
    for probe in (path, path.resolve()) if path.is_symlink() else (path,):
        try:
            info = os.lstat(probe)
        except FileNotFoundError:
            return
        except OSError as exc:
            raise OwnershipError(f"{what} {one_line_path(probe)}: cannot inspect "
                                 f"({exc.strerror or exc})") from None
        me = os.geteuid()
        if info.st_uid != me and not (root_ok and info.st_uid == 0):
            raise OwnershipError(
                f"{what} {one_line_path(probe)}: owned by {_owner_text(info.st_uid)}, not by "
                f"{_owner_text(me)} who runs sweepd serve; refusing to trust it")
        if stat.S_ISLNK(info.st_mode):
            continue
        if info.st_mode & (stat.S_IWGRP | stat.S_IWOTH):
            raise OwnershipError(
                f"{what} {one_line_path(probe)}: writable by group or others (mode "
                f"{stat.S_IMODE(info.st_mode):04o}); refusing to trust it (chmod go-w)")


def check_command(words: tuple[str, ...] | list[str], what: str) -> Path:
    """The executable a command would run, checked like :func:`check_private` (root may
    own it); a name without a slash is looked up on ``PATH`` first."""
    name = words[0]
    found = name if "/" in name else shutil.which(name)
    if found is None:
        raise OwnershipError(f"{what} {name!r}: not found on PATH")
    path = Path(found)
    check_private(path, what, root_ok=True)
    return path


def check_folders(paths: list[Path], what: str) -> None:
    """Each existing folder that will be written to, checked with :func:`check_private`."""
    for path in paths:
        check_private(path, what)


def check_job_paths(output_dir: Path, data_dir: Path, cal_dir: Path,
                    alarm_command: tuple[str, ...]) -> None:
    """Everything a soak job writes into or runs, before it takes its first sweep."""
    check_folders([output_dir, data_dir], "output folder")
    check_folders([cal_dir], "calibration folder")
    if alarm_command:
        check_command(alarm_command, "alarm command")
