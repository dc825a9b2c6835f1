"""Output folders and files, replaced whole and atomically.

The folder is the unit: a build (or `fit`) fills a hidden temporary folder beside it, then
swaps it in -- with Linux `renameat2(RENAME_EXCHANGE)` when the folder exists, so a reader
sees the old folder or the new one and never a mix, or a plain rename when it does not --
and removes what it replaced.  So concurrent runs into one folder all succeed and leave
exactly one complete build; files of an earlier build of another name, or of `fit`, do not
survive; a failure (a full disk) leaves the folder as it was, with no temporary folder and
no parent folder made by this run.

A folder is carrypipe's when it holds the marker file `.carrypipe`.  An existing folder that
is not empty and has no marker is never replaced (`FolderRefused`), nor the current folder
or one that holds it.  Temporary names are `.<name>.carrypipe-<host>-<pid>-<random>`; a run
into a parent first removes the ones of this host whose process has gone (killed runs).
A single file (`plan --chart`) is written under such a name and renamed over the old one.
"""

from __future__ import annotations

import contextlib
import ctypes
import errno
import os
import re
import secrets
import shutil
import socket
import stat
import sys
import zlib
from pathlib import Path

MARKER = ".carrypipe"
MARKER_TEXT = ("This folder was written by carrypipe, which replaces it whole on the next "
               "build or fit into it.\n")
HOST = format(zlib.crc32(socket.gethostname().encode()), "08x")
_TEMP = re.compile(r"\..*\.carrypipe-([0-9a-f]{8})-(\d+)-[0-9a-f]{8}", re.S)


class FolderRefused(ValueError):
    """The output path may not be written (bad input); the message is one line."""


def _refuse(option: str, given, why: str) -> FolderRefused:
    return FolderRefused(f"{option}: value {str(given)!r} is not allowed; {why}")


def _check_ancestors(target: Path, option: str, given) -> None:
    """The nearest existing folder above `target` must be a folder, not a file."""
    above = target.parent
    while not os.path.lexists(above):
        above = above.parent
    if not above.is_dir():
        raise _refuse(option, given, f"{above} is a file, not a folder")


def check_folder(out: str | Path, option: str = "-o") -> Path:
    """The absolute path of output folder `out`, or `FolderRefused` when carrypipe may not
    replace it (a file; the current folder or one holding it; a folder of other files)."""
    target = Path(os.path.realpath(out))
    _check_ancestors(target, option, out)
    if not os.path.lexists(target):
        return target
    if not target.is_dir():
        raise _refuse(option, out, "expected a folder (it is a file)")
    try:
        here = Path.cwd().resolve()
    except OSError:  # the current folder was removed: it cannot be the target
        here = None
    if here is not None and (target == here or target in here.parents):
        raise _refuse(option, out, "it is or holds the current folder, and carrypipe "
                      "replaces its output folder whole; expected a folder below it")
    if not _ours(target) and not _empty(target):
        raise _refuse(option, out, f"it holds files carrypipe did not write (no {MARKER} "
                      "marker); expected a new or empty folder, or one carrypipe wrote")
    return target


def probe_folder(out: str | Path, option: str = "-o") -> Path:
    """`check_folder`, then a trial write: the missing folders above `out` and a temporary
    folder beside it are made and removed again, and an existing `out` must be writable
    (read-only or immutable: it could not be replaced), so that a folder that cannot be
    written fails (OSError) before a long run rather than after it."""
    target = check_folder(out, option)
    if target.is_dir() and not os.access(target, os.W_OK):  # it is moved aside at the end
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), str(target))
    created = _make_parents(target.parent)
    try:
        os.rmdir(_fresh(target.parent, target.name, folder=True))
    finally:
        _remove(created)
    return target


def _ours(folder: Path) -> bool:
    return (folder / MARKER).is_file()


def _empty(folder: Path) -> bool:
    with os.scandir(folder) as entries:
        return next(entries, None) is None


def replace_folder(files: dict[str, str | bytes], out: str | Path, option: str = "-o") -> Path:
    """Make `out` a folder holding exactly `files` (and the marker), atomically; see above.
    Text is written as UTF-8 with LF line ends, bytes as they are."""
    target = check_folder(out, option)
    created = _make_parents(target.parent)
    try:
        sweep(target.parent)
        tmp = _fresh(target.parent, target.name, folder=True)
    except BaseException:
        _remove(created)
        raise
    try:
        with contextlib.suppress(FileNotFoundError):  # keep the mode the user gave the folder
            os.chmod(tmp, stat.S_IMODE(target.stat().st_mode))
        for name, data in {**files, MARKER: MARKER_TEXT}.items():
            _write(tmp / name, data)
        old = _swap(tmp, target, option, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        _remove(created)
        raise
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)
    return target


def write_file(path: str | Path, data: str | bytes, option: str) -> Path:
    """Write one file atomically: a temporary file beside it, then a rename over it.  Its
    folder is made when missing (and removed again when the write fails).  A symbolic link
    is written through, as a shell's `>` would, and a file replaced keeps its mode."""
    target = Path(os.path.abspath(path))
    if target.is_symlink():
        target = Path(os.path.realpath(target))
    _check_ancestors(target, option, path)
    if target.is_dir():
        raise _refuse(option, path, "expected a file name (it is a folder)")
    created = _make_parents(target.parent)
    tmp = None
    try:
        sweep(target.parent)
        tmp = _fresh(target.parent, target.name, folder=False)
        _write(tmp, data, exclusive=False)
        if target.is_file():
            os.chmod(tmp, stat.S_IMODE(target.stat().st_mode))
        os.replace(tmp, target)
    except BaseException:
        if tmp is not None and os.path.lexists(tmp):
            os.unlink(tmp)
        _remove(created)
        raise
    return target


def sweep(parent: Path) -> None:
    """Remove the temporary folders and files that killed runs left in `parent`: only our
    own names, made on this host, by a process that no longer runs, owned by this user."""
    try:
        with os.scandir(parent) as found:
            entries = list(found)
    except OSError:
        return
    for entry in entries:
        m = _TEMP.fullmatch(entry.name)
        if not m or m.group(1) != HOST or _running(int(m.group(2))):
            continue
        try:
            info = entry.stat(follow_symlinks=False)
            if info.st_uid != os.geteuid():
                continue
            if stat.S_ISDIR(info.st_mode):
                shutil.rmtree(entry.path, ignore_errors=True)
            else:
                os.unlink(entry.path)
        except OSError:
            pass  # another run removed it first


def _running(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _name(parent: Path, name: str) -> Path:
    """A temporary name beside `name` in `parent` (see the module docstring)."""
    return parent / f".{name[:80]}.carrypipe-{HOST}-{os.getpid()}-{secrets.token_hex(4)}"


def _fresh(parent: Path, name: str, folder: bool) -> Path:
    """A new temporary folder (or reserved file name) beside `name` in `parent`."""
    while True:
        tmp = _name(parent, name)
        try:
            if folder:
                os.mkdir(tmp)
            else:
                os.close(os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666))
            return tmp
        except FileExistsError:
            continue


def _write(path: Path, data: str | bytes, exclusive: bool = True) -> None:
    """Write one file with the permissions a plain open() gives (0666 less the umask)."""
    flags = os.O_WRONLY | os.O_CREAT | (os.O_EXCL if exclusive else os.O_TRUNC)
    fd = os.open(path, flags, 0o666)
    try:
        fh = (os.fdopen(fd, "wb") if isinstance(data, bytes)
              else os.fdopen(fd, "w", encoding="utf-8", newline="\n"))
    except BaseException:
        os.close(fd)
        raise
    with fh:
        fh.write(data)


def _make_parents(folder: Path) -> list[Path]:
    """Make `folder` and the folders above it that are missing; return the ones made here."""
    missing = []
    while not os.path.lexists(folder):
        missing.append(folder)
        folder = folder.parent
    made = []
    try:
        for path in reversed(missing):
            try:
                os.mkdir(path)
                made.append(path)
            except FileExistsError:
                pass  # a concurrent run made it: not ours to remove
    except BaseException:
        _remove(made)
        raise
    return made


def _remove(made: list[Path]) -> None:
    """Remove folders made by this run, deepest first, while they are empty."""
    for path in reversed(made):
        try:
            os.rmdir(path)
        except OSError:
            return


# ---- the swap ----

def _renameat2():
    if not sys.platform.startswith("linux"):
        return None
    try:
        fn = ctypes.CDLL(None, use_errno=True).renameat2
    except (OSError, AttributeError):
        return None
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    fn.restype = ctypes.c_int
    return fn


_RENAMEAT2 = _renameat2()
_AT_FDCWD, _RENAME_EXCHANGE = -100, 2


def exchange(a: Path, b: Path) -> None:
    """Swap the two paths atomically (Linux renameat2 RENAME_EXCHANGE); `OSError` with
    ENOSYS or EINVAL where the system or file system cannot."""
    if _RENAMEAT2 is None:
        raise OSError(errno.ENOSYS, "renameat2 is not available", str(b))
    if _RENAMEAT2(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE):
        code = ctypes.get_errno()
        raise OSError(code, os.strerror(code), str(b))


def _swap(tmp: Path, target: Path, option: str, given) -> Path | None:
    """Put folder `tmp` in place as `target`; return where the replaced folder now is."""
    for _ in range(1000):  # each turn lost to a concurrent run; it cannot go on for long
        if os.path.lexists(target):
            if not target.is_dir() or not (_ours(target) or _empty(target)):
                raise _refuse(option, given, "it was replaced meanwhile by something "
                              "carrypipe did not write")
            try:
                exchange(tmp, target)
                return tmp
            except FileNotFoundError:
                continue  # removed meanwhile: rename instead
            except OSError as exc:
                if exc.errno not in (errno.ENOSYS, errno.EINVAL):
                    raise
            aside = _name(target.parent, target.name)  # no exchange here: two renames,
            try:  # with a moment when `target` is missing
                os.rename(target, aside)
            except FileNotFoundError:
                continue
            try:
                os.rename(tmp, target)
            except OSError as exc:
                shutil.rmtree(aside, ignore_errors=True)
                if exc.errno not in (errno.EEXIST, errno.ENOTEMPTY):
                    raise
                continue
            return aside
        try:
            os.rename(tmp, target)
            return None
        except OSError as exc:
            if exc.errno not in (errno.EEXIST, errno.ENOTEMPTY):
                raise
    raise OSError(errno.EBUSY, "too many concurrent writers", str(target))
