"""Writing output files safely: a case's files as one set, names from others made harmless.

Everything here is light (standard library only), so the command line can use it before any
heavy module is imported.

A set of files is written in three steps: every file goes into a private staging folder
inside the output folder (same file system, so the renames below are atomic); then, with
SIGINT/SIGTERM/SIGHUP held back and the output folder locked against other closedform runs
(``flock`` on the folder itself, so no lock file is left behind), each old file of the set
is moved aside and the new one renamed into place; an error in the middle puts the old
files back. A reader therefore sees the old set or the new set, never a mix, and no
temporary file stays behind on any exit path Python can see (SIGKILL excepted: its staging
folder ``.closedform-stage-*`` is removed by the next run into the same folder).
"""

from __future__ import annotations

import contextlib
import errno
import os
import shutil
import signal
import tempfile
import threading
import time
import unicodedata
from collections.abc import Iterator, Mapping
from pathlib import Path

STAGE_PREFIX = ".closedform-stage-"
#: Signals held back while a set of files is being renamed into place.
HELD_SIGNALS = {signal.SIGINT, signal.SIGTERM, signal.SIGHUP}
#: A staging folder older than this (seconds) is an orphan of a killed run.
ORPHAN_AGE = 3600.0


class OutputError(OSError):
    """A set of files could not be written; nothing of the set was left behind."""


def safe_stem(path: str | os.PathLike) -> str:
    """The stem of a case file name as used for its output files.

    Control characters (C0, C1, DEL), format characters (zero-width, bidirectional
    controls, soft hyphen, tag characters, byte-order marks), line and paragraph separators
    and unpaired surrogates become ``_``; a leading ``-`` or ``.`` becomes ``_`` too, so an
    output name can never read as an option or a hidden file. Ordinary letters of any
    script, spaces, ``%``, ``~``, ``$`` and the like are kept: the files are written with
    system calls, never through a shell.
    """
    stem = Path(path).stem
    cleaned = "".join("_" if _unsafe(c) else c for c in stem)
    if cleaned[:1] in ("-", "."):
        cleaned = "_" + cleaned[1:]
    return cleaned.strip() or "case"


def _unsafe(character: str) -> bool:
    category = unicodedata.category(character)
    return category in ("Cc", "Cf", "Zl", "Zp", "Cs", "Co", "Cn") or character in "/\\"


@contextlib.contextmanager
def held_signals() -> Iterator[None]:
    """SIGINT, SIGTERM and SIGHUP wait until the block ends (then act as usual).

    Blocking them in this thread is not enough: a signal sent to the process is delivered
    to any thread that does not block it (numpy's and other libraries' native threads), and
    Python then runs its handler in the main thread at once. So, in the main thread, each
    handler is also replaced for the block by one that only notes the signal, and every
    noted signal is raised again, to its own handler, when the block ends."""
    main = threading.current_thread() is threading.main_thread()
    noted: list[int] = []
    handlers = {}
    if main:
        for number in HELD_SIGNALS:
            handlers[number] = signal.getsignal(number)
            signal.signal(number, lambda signum, _frame: noted.append(signum))
    masked = hasattr(signal, "pthread_sigmask")
    previous: set = signal.pthread_sigmask(signal.SIG_BLOCK, HELD_SIGNALS) if masked else set()
    try:
        yield
    finally:
        if masked:
            signal.pthread_sigmask(signal.SIG_SETMASK, previous)
        for number, handler in handlers.items():
            signal.signal(number, handler if handler is not None else signal.SIG_DFL)
        for noted_signal in dict.fromkeys(noted):
            signal.raise_signal(noted_signal)


@contextlib.contextmanager
def folder_lock(folder: Path) -> Iterator[None]:
    """An exclusive lock among closedform runs writing into ``folder`` (advisory flock on
    the folder itself, released when the block ends or the process dies)."""
    try:
        import fcntl
    except ImportError:  # pragma: no cover - not on POSIX
        yield
        return
    descriptor = os.open(folder, os.O_RDONLY)
    try:
        try:
            fcntl.flock(descriptor, fcntl.LOCK_EX)
        except OSError as error:      # a file system without flock: write unlocked
            if error.errno not in (errno.ENOLCK, errno.EINVAL, errno.EOPNOTSUPP):
                raise
        yield
    finally:
        os.close(descriptor)


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def remove_orphans(folder: Path) -> None:
    """Staging folders left by a killed run (older than an hour) are removed."""
    try:
        entries = list(folder.iterdir())
    except OSError:
        return
    now = time.time()
    for entry in entries:
        if entry.name.startswith(STAGE_PREFIX):
            try:
                if now - entry.lstat().st_mtime > ORPHAN_AGE and entry.is_dir():
                    shutil.rmtree(entry, ignore_errors=True)
            except OSError:
                pass


def write_set(folder: Path, contents: Mapping[str, str | bytes]) -> list[Path]:
    """Write every file of ``contents`` (name → text or bytes) into ``folder`` as one set.

    Raises OSError (after removing everything it made) when the set cannot be written; the
    files already in the folder are then as they were.
    """
    folder = Path(folder)
    for name in contents:
        if not name or Path(name).is_absolute() or ".." in Path(name).parts:
            raise OutputError(errno.EINVAL, f"not a plain output file name: {name!r}")
    folder.mkdir(parents=True, exist_ok=True)
    remove_orphans(folder)
    stage = Path(tempfile.mkdtemp(prefix=STAGE_PREFIX, dir=folder))
    try:
        mode = 0o666 & ~_umask()
        for name, content in contents.items():
            data = content.encode("utf-8") if isinstance(content, str) else content
            staged = stage / "new" / name
            staged.parent.mkdir(parents=True, exist_ok=True)
            with open(staged, "wb") as stream:
                stream.write(data)
                stream.flush()
                os.fsync(stream.fileno())
            os.chmod(staged, mode)
        (stage / "old").mkdir()
    except BaseException:
        shutil.rmtree(stage, ignore_errors=True)
        raise
    with held_signals():      # a signal waits until the set is whole and the stage gone
        try:
            with folder_lock(folder):
                return _swap_in(folder, stage, list(contents))
        finally:
            shutil.rmtree(stage, ignore_errors=True)


def _swap_in(folder: Path, stage: Path, names: list[str]) -> list[Path]:
    moved_aside: list[str] = []
    placed: list[str] = []
    try:
        for name in names:
            target = folder / name
            target.parent.mkdir(parents=True, exist_ok=True)
            if target.is_dir() and not target.is_symlink():
                raise OutputError(errno.EISDIR, f"'{target}' is a folder")
            if os.path.lexists(target):
                aside = stage / "old" / name
                aside.parent.mkdir(parents=True, exist_ok=True)
                os.replace(target, aside)
                moved_aside.append(name)
            os.replace(stage / "new" / name, target)
            placed.append(name)
    except BaseException:
        for name in placed:
            with contextlib.suppress(OSError):
                os.unlink(folder / name)
        for name in moved_aside:
            with contextlib.suppress(OSError):
                os.replace(stage / "old" / name, folder / name)
        raise
    return [folder / name for name in names]
