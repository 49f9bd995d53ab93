"""What derive writes to disk, and the one rule it follows there: it replaces only what it wrote itself.

An output folder (``--out DIR``) may be written when it

* does not exist yet,
* is an empty folder, or
* carries derive's marker file (``.derive-output``), which derive puts in every folder it writes.

Anything else is refused (:class:`~derive.errors.InputError`, exit 2) with the reason and what to do, and so
are the file system's root, the home folder, the current folder and every folder that holds it, a link, and a
path that names a regular file.  A single output file (``--latex FILE``) is written where nothing exists yet or
where derive wrote the file before (its first line is derive's); a folder or a file of someone else's is
refused.

Folders are built in a staging folder beside the target (``.derive-staging-PID-...``, holding the marker) and
moved into place whole at the end, so an interrupted run leaves an earlier folder as it was.  Staging and
swapped-out folders whose process is gone (a killed run) are removed by the next run in the same place; only
those that carry the marker and a process id that no longer runs.  Files and folders get the user's umask
(not the private modes that temporary files start with).
"""

from __future__ import annotations

import json
import os
import shutil
import stat
import tempfile

from derive.errors import InputError

MARKER = ".derive-output"
STAGING_PREFIX = ".derive-staging-"
OLD_PREFIX = ".derive-old-"
LATEX_FIRST_LINE = "% Written by derive"


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _file_mode() -> int:
    return 0o666 & ~_umask()


def _folder_mode() -> int:
    return 0o777 & ~_umask()


def carries_marker(folder: str) -> bool:
    """True when ``folder`` holds derive's marker as a regular file that derive could have written."""
    path = os.path.join(folder, MARKER)
    try:
        info = os.lstat(path)
    except OSError:
        return False
    if not stat.S_ISREG(info.st_mode) or info.st_size > 4096:
        return False
    try:
        with open(path, encoding="utf-8") as handle:
            return json.load(handle).get("written_by") == "derive"
    except (OSError, ValueError, AttributeError):
        return False


def write_marker(folder: str, kind: str, staging_pid: int | None = None) -> None:
    from derive import __version__

    record = {"written_by": "derive", "version": __version__, "kind": kind}
    if staging_pid is not None:
        record["staging_pid"] = staging_pid
    write_atomic(os.path.join(folder, MARKER), json.dumps(record) + "\n")


def _protected(path: str) -> str | None:
    """Why ``path`` (absolute, resolved) may never be an output folder, or None."""
    if os.path.dirname(path) == path:
        return "it is the root of the file system"
    home = os.path.realpath(os.path.expanduser("~"))
    if path == home:
        return "it is your home folder"
    cwd = os.path.realpath(os.getcwd())
    if path == cwd:
        return "it is the current folder"
    if os.path.commonpath([path, cwd]) == path:
        return "it holds the current folder"
    return None


def check_output_folder(out: str, key: str = "--out") -> str:
    """Refuse (exit 2) a folder derive may not write into or replace; return its absolute path.

    Parameters
    ----------
    out : str
        The folder the user named.
    key : str
        The option or key that named it, for the message.
    """
    if not isinstance(out, str) or not out.strip() or "\x00" in out:
        raise InputError(f"{out!r} is not a folder name", key=key)
    path = os.path.abspath(os.path.expanduser(out))
    if os.path.islink(path):
        raise InputError(f"{out} is a link; name the folder itself (derive does not write through links)",
                         key=key)
    resolved = os.path.realpath(path)
    reason = _protected(resolved)
    if reason:
        raise InputError(f"{out} cannot be an output folder: {reason}. Name a new folder, e.g. {key} results",
                         key=key)
    if os.path.lexists(path) and not os.path.isdir(path):
        raise InputError(f"{out} is a file, not a folder; name a new folder (derive will not replace a file)",
                         key=key)
    if os.path.isdir(path):
        try:
            entries = os.listdir(path)
        except OSError as exc:
            raise InputError(f"{out} cannot be read ({exc.strerror})", key=key) from None
        if entries and not carries_marker(path):
            raise InputError(f"{out} holds files derive did not write (it has no {MARKER} marker), so derive "
                             "will not write there. Name a new or empty folder, or move those files away "
                             "yourself", key=key)
    parent = os.path.dirname(path)
    if os.path.exists(parent) and not os.path.isdir(parent):
        raise InputError(f"{out}: {parent} is a file, not a folder", key=key)
    return path


def check_output_file(path: str, key: str, first_line: str = LATEX_FIRST_LINE) -> str:
    """Refuse (exit 2) a file path derive may not write: a folder, a link, or a file derive did not write."""
    if not isinstance(path, str) or not path.strip() or "\x00" in path:
        raise InputError(f"{path!r} is not a file name", key=key)
    full = os.path.abspath(os.path.expanduser(path))
    if os.path.isdir(full):
        raise InputError(f"{path} is a folder; name a file, e.g. {os.path.join(path, 'derivation.tex')}", key=key)
    if os.path.islink(full):
        raise InputError(f"{path} is a link; name the file itself (derive does not write through links)", key=key)
    if os.path.lexists(full):
        try:
            with open(full, encoding="utf-8", errors="replace") as handle:
                head = handle.readline()
        except OSError as exc:
            raise InputError(f"{path} cannot be read ({exc.strerror})", key=key) from None
        if not head.startswith(first_line):
            raise InputError(f"{path} exists and was not written by derive; derive will not overwrite it. "
                             "Name a new file", key=key)
    parent = os.path.dirname(full)
    if os.path.exists(parent) and not os.path.isdir(parent):
        raise InputError(f"{path}: {parent} is a file, not a folder", key=key)
    return full


def write_atomic(path: str, text: str | bytes) -> None:
    """Write a file so that it either appears whole or not at all, with the user's umask."""
    folder = os.path.dirname(os.path.abspath(path)) or "."
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=".tmp-")
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(text.encode("utf-8") if isinstance(text, str) else text)
        os.chmod(tmp, _file_mode())
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def prepare_folder(out: str, kind: str, key: str = "--out") -> str:
    """Make ``out`` ready for files written into it in place (spectrum, response, scan): checked, created
    with the user's umask, marked.  Returns the absolute path."""
    path = check_output_folder(out, key)
    os.makedirs(path, exist_ok=True)
    if not carries_marker(path):
        write_marker(path, kind)
    return path


def _process_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def clean_stale(parent: str) -> list[str]:
    """Remove staging and swapped-out folders in ``parent`` left by derive runs that were killed.

    Only folders named by derive's prefixes, holding derive's marker, whose process id (in the name) no
    longer runs, are removed.  Returns the folders removed.
    """
    removed = []
    try:
        entries = os.listdir(parent)
    except OSError:
        return removed
    for name in entries:
        if not (name.startswith(STAGING_PREFIX) or name.startswith(OLD_PREFIX)):
            continue
        path = os.path.join(parent, name)
        prefix = STAGING_PREFIX if name.startswith(STAGING_PREFIX) else OLD_PREFIX
        pid_text = name[len(prefix):].split("-")[0]
        if not pid_text.isdigit() or os.path.islink(path) or not os.path.isdir(path):
            continue
        if _process_alive(int(pid_text)) or not carries_marker(path):
            continue
        shutil.rmtree(path, ignore_errors=True)
        removed.append(path)
    return removed


def staging_folder(out: str, kind: str) -> str:
    """A new staging folder beside ``out`` (already checked), marked, with the user's umask."""
    parent = os.path.dirname(out)
    os.makedirs(parent, exist_ok=True)
    clean_stale(parent)
    staging = tempfile.mkdtemp(prefix=f"{STAGING_PREFIX}{os.getpid()}-", dir=parent)
    os.chmod(staging, _folder_mode())
    write_marker(staging, kind, staging_pid=os.getpid())
    return staging


def replace_folder(staging: str, out: str, kind: str) -> None:
    """Move a fully written staging folder into place as ``out``.

    ``out`` is checked again (it may have changed while the run worked); an earlier ``out`` of derive's is
    swapped away first and removed only after the new one is in place.
    """
    out = check_output_folder(out)
    write_marker(staging, kind)
    parent = os.path.dirname(out)
    backup = None
    if os.path.isdir(out):
        backup = tempfile.mkdtemp(prefix=f"{OLD_PREFIX}{os.getpid()}-", dir=parent)
        os.rmdir(backup)
        os.replace(out, backup)
    os.replace(staging, out)
    if backup:
        shutil.rmtree(backup, ignore_errors=True)
