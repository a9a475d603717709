"""Writing a text file safely.

What :func:`write_text_atomic` promises:

- Readers see the old file or the new one in full, never a part of either: the
  text goes to a temporary file ``.NAME.<random>.tmp`` in the same folder, is
  flushed to disk, and only then takes the name, in one step.
- Without ``overwrite``, an existing file is never replaced, not even one that
  appears while the text is being written: the temporary file is hard-linked to
  the name, which the system refuses if the name is taken (on a file system
  without hard links the file is created exclusively, ``O_EXCL``, and written in
  place).
- With ``overwrite``, the new file keeps the old one's permission bits, and a
  symbolic link is followed: its target is replaced and the link stays a link.
- SIGINT (Ctrl-C) and SIGTERM that arrive while the file is written are held
  until the temporary file has been committed or removed, and then delivered;
  a signal that arrives before the commit cancels it.  So no temporary file is
  left behind by either.  SIGKILL or a power cut can leave one (never a damaged
  or half-written target); nothing can clean up after those.

:func:`check_output_path` runs the same checks as the writer without writing,
so that a front end can refuse an unusable path before any long computation.
"""

from __future__ import annotations

import errno
import os
import secrets
import signal
import stat
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager, suppress
from dataclasses import dataclass
from pathlib import Path
from types import FrameType
from typing import Any

from decide.errors import DecideError

#: Longest file name (in bytes) assumed where the system does not say.
DEFAULT_NAME_MAX = 255
#: Bytes handed to one ``os.write`` call.
_CHUNK = 1 << 16
#: Errors from ``os.link`` meaning "this file system has no hard links".
_NO_HARD_LINKS = {errno.EPERM, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EMLINK, errno.ENOSYS}
_HELD_SIGNALS: tuple[int, ...] = (signal.SIGINT, signal.SIGTERM)


@dataclass(frozen=True)
class _Plan:
    """Where the text will go: ``dest`` (a symlink's target when overwriting) and the mode to keep."""

    target: Path
    dest: Path
    mode: int | None


def _cannot(target: Path, reason: str) -> DecideError:
    return DecideError(f"{target}: cannot be written: {reason}", (str(target),))


def _already_exists(target: Path) -> DecideError:
    return DecideError(f"{target}: already exists; not overwriting it", (str(target),))


def _name_max(folder: Path) -> int:
    try:
        return int(os.pathconf(folder, "PC_NAME_MAX"))
    except (OSError, ValueError, AttributeError):
        return DEFAULT_NAME_MAX


def _check_folder(target: Path, folder: Path) -> None:
    try:
        info = os.stat(folder)
    except FileNotFoundError:
        raise _cannot(target, f"the folder {folder} does not exist") from None
    except NotADirectoryError:
        raise _cannot(target, f"a part of {folder} is a file, not a folder") from None
    except OSError as e:
        raise _cannot(target, f"the folder {folder} cannot be reached: {e.strerror or e}") from None
    if not stat.S_ISDIR(info.st_mode):
        raise _cannot(target, f"{folder} is a file, not a folder")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise _cannot(target, f"no permission to create files in {folder}")


def _existing_mode(target: Path, dest: Path, overwrite: bool) -> int | None:
    """The permission bits of the file at ``dest``, or None if there is none."""
    try:
        info = os.lstat(dest)
    except FileNotFoundError:
        return None
    except OSError as e:
        raise _cannot(target, e.strerror or str(e)) from None
    if not overwrite:
        raise _already_exists(target)
    if stat.S_ISDIR(info.st_mode):
        raise _cannot(target, "it is a folder")
    if not stat.S_ISREG(info.st_mode):
        raise _cannot(target, "it is not a regular file")
    return stat.S_IMODE(info.st_mode)


def _check_name(target: Path, dest: Path) -> None:
    length, limit = len(os.fsencode(dest.name)), _name_max(dest.parent)
    if length > limit:
        raise _cannot(target, f"its name is {length} bytes long, over the limit of {limit}")


def _destination(target: Path, overwrite: bool) -> Path:
    """``target``, or the file a symbolic link at ``target`` points to when overwriting."""
    try:
        linked = overwrite and target.is_symlink()
        return Path(os.path.realpath(target)) if linked else target
    except OSError as e:
        raise _cannot(target, e.strerror or str(e)) from None


def _plan(path: str | os.PathLike[str], overwrite: bool) -> _Plan:
    if not os.fspath(path):
        raise DecideError("the output path is empty", ("output",))
    target = Path(path)
    _check_name(target, target)
    dest = _destination(target, overwrite)
    _check_folder(target, dest.parent)
    _check_name(target, dest)
    return _Plan(target, dest, _existing_mode(target, dest, overwrite))


def check_output_path(path: str | os.PathLike[str], overwrite: bool = False) -> Path:
    """Check that :func:`write_text_atomic` could write ``path``; write nothing.

    Meant to run before a long computation whose result goes to ``path``.  The
    checks are those of the writer: the folder exists and may be written in,
    the name is not too long, and the file does not exist unless
    ``overwrite`` (then it must be a regular file, or a link to one).

    Returns
    -------
    Path
        ``path`` as a :class:`~pathlib.Path`.

    Raises
    ------
    DecideError
        One line: ``<path>: already exists; ...`` or ``<path>: cannot be written: <reason>``.
    """
    return _plan(path, overwrite).target


def _temp_path(dest: Path) -> Path:
    """``.NAME.<random>.tmp`` beside ``dest``, shortened to fit the longest allowed name."""
    token = secrets.token_hex(6)
    room = _name_max(dest.parent) - len(f"..{token}.tmp")
    stem = os.fsdecode(os.fsencode(dest.name)[:room])
    return dest.with_name(f".{stem}.{token}.tmp")


@contextmanager
def _signals_held() -> Iterator[list[int]]:
    """Hold SIGINT and SIGTERM: record them in the yielded list, deliver them on exit.

    Only the main thread receives Python signal handlers, so elsewhere this
    holds nothing.  Ignored signals stay ignored.
    """
    caught: list[int] = []
    previous: dict[int, Callable[[int, FrameType | None], Any] | int | signal.Handlers] = {}
    if threading.current_thread() is not threading.main_thread():
        yield caught
        return

    def record(signum: int, frame: FrameType | None) -> None:
        caught.append(signum)

    try:
        for signum in _HELD_SIGNALS:
            old = signal.getsignal(signum)
            if old is None or old == signal.SIG_IGN:
                continue
            previous[signum] = old
            signal.signal(signum, record)
        yield caught
    finally:
        for held, old in previous.items():
            signal.signal(held, old)
        for arrived in dict.fromkeys(caught):
            signal.raise_signal(arrived)  # the usual handler runs now (Ctrl-C raises here)


def _write_all(fd: int, data: bytes) -> None:
    view = memoryview(data)
    while view:
        view = view[os.write(fd, view[:_CHUNK]) :]


def _fill_temp(temp: Path, data: bytes, mode: int | None) -> None:
    """Create ``temp`` exclusively, write ``data``, flush it to disk."""
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0)
    # 0o666 less the umask, as for any new file; an overwritten file's own mode otherwise.
    fd = os.open(temp, flags, 0o666 if mode is None else 0o600)
    try:
        if mode is not None and hasattr(os, "fchmod"):
            os.fchmod(fd, mode)
        _write_all(fd, data)
        os.fsync(fd)
    finally:
        os.close(fd)


def _write_exclusive(plan: _Plan, data: bytes) -> None:
    """Create the file exclusively and write in place (file systems without hard links)."""
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0)
    try:
        fd = os.open(plan.dest, flags, 0o666)
    except FileExistsError:
        raise _already_exists(plan.target) from None
    try:
        _write_all(fd, data)
        os.fsync(fd)
    except BaseException:
        with suppress(OSError):
            os.unlink(plan.dest)
        raise
    finally:
        os.close(fd)


def _commit(plan: _Plan, temp: Path, data: bytes, overwrite: bool) -> None:
    """Give the finished temporary file its name: replace, or link where nothing may be replaced."""
    if overwrite:
        os.replace(temp, plan.dest)
        return
    try:
        os.link(temp, plan.dest, follow_symlinks=False)
    except FileExistsError:
        raise _already_exists(plan.target) from None
    except OSError as e:
        if e.errno not in _NO_HARD_LINKS:
            raise
        _write_exclusive(plan, data)


def _sync_folder(folder: Path) -> None:
    """Flush the folder entry to disk where the system allows it (best effort)."""
    with suppress(OSError, AttributeError):
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def _write_held(plan: _Plan, data: bytes, overwrite: bool, caught: list[int]) -> bool:
    """Write through a temporary file; False if a held signal cancelled the commit."""
    temp = _temp_path(plan.dest)
    try:
        _fill_temp(temp, data, plan.mode)
        if caught:
            return False
        _commit(plan, temp, data, overwrite)
    finally:
        with suppress(OSError):
            os.unlink(temp)  # gone already after a replace; after a link, the spare name
    _sync_folder(plan.dest.parent)
    return True


def write_text_atomic(path: str | os.PathLike[str], text: str, overwrite: bool = False) -> Path:
    """Write ``text`` (UTF-8) to ``path`` so that readers see the old file or the new one.

    An existing file is refused unless ``overwrite`` is true; the refusal holds
    even against a file created while this one is written.  See the module
    notes for what is guaranteed under signals and crashes.

    Returns
    -------
    Path
        ``path`` as a :class:`~pathlib.Path`.

    Raises
    ------
    DecideError
        If the file exists and ``overwrite`` is false, or it cannot be written
        (one line naming the path and the reason).
    """
    plan = _plan(path, overwrite)
    data = text.encode("utf-8")
    try:
        with _signals_held() as caught:
            written = _write_held(plan, data, overwrite, caught)
    except OSError as e:
        raise _cannot(plan.target, e.strerror or str(e)) from None
    if not written:  # a held signal whose handler did not raise
        raise _cannot(plan.target, "interrupted by a signal; the old file, if any, is unchanged")
    return plan.target
