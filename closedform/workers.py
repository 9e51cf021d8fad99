"""Running cases in worker processes: one process per case, under a memory budget.

Each task runs in a process of its own (forked, so it starts with what the parent has
imported), which gives three guarantees a shared pool cannot:

- a worker that dies (the out-of-memory killer, a crash in compiled code) loses only its
  own case, which is named; the other cases go on;
- the memory of each case is bounded: the parent reads every worker's own memory (its
  private pages, resident or swapped) 20 times a second and ends a worker that passes the
  budget (the address-space limit
  ``RLIMIT_AS`` set in the worker at twice the budget is a backstop for a sudden jump);
- when the run is stopped (Ctrl-C, SIGTERM, SIGHUP) every worker is ended before the
  parent returns: none is left running.

Light module: standard library only.
"""

from __future__ import annotations

import os
import pickle
import signal
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any, TypeVar, cast

R = TypeVar("R")
GIB = 1024 ** 3
MIB = 1024 ** 2
#: The default memory budget of one case (the machine this was made on has 24 GiB).
DEFAULT_MEMORY = 4 * GIB
#: Seconds between looks at the workers' memory.
POLL_SECONDS = 0.05
#: A worker still running this long past its time budget (stuck in compiled code that the
#: alarm cannot interrupt) is ended by the parent.
GRACE_SECONDS = 30.0


class Stopped(BaseException):
    """The run was stopped by a signal (SIGTERM, SIGHUP); ``exit_code`` is 128 + signal."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum
        self.exit_code = 128 + signum
        self.name = signal.Signals(signum).name


def _raise_stopped(signum, _frame) -> None:
    raise Stopped(signum)


def install_stop_handlers() -> dict:
    """SIGTERM and SIGHUP raise :class:`Stopped` in the main thread (SIGINT already raises
    KeyboardInterrupt); returns the previous handlers for :func:`restore_handlers`."""
    previous = {}
    for signum in (signal.SIGTERM, signal.SIGHUP):
        try:
            previous[signum] = signal.signal(signum, _raise_stopped)
        except (ValueError, OSError):  # not the main thread
            pass
    return previous


def restore_handlers(previous: dict) -> None:
    for signum, handler in previous.items():
        signal.signal(signum, handler)


@dataclass(frozen=True)
class Lost:
    """A task whose worker ended without a result: ``reason`` says how."""

    index: int
    reason: str
    memory: bool = False     # ended for passing the memory budget


@dataclass(frozen=True)
class _Returned:
    """What a worker sends back when its task returned."""

    value: Any


@dataclass(frozen=True)
class _Raised:
    """What a worker sends back when its task raised (or ran out of memory)."""

    reason: str
    memory: bool = False


def format_size(size: int) -> str:
    if size % GIB == 0:
        return f"{size // GIB} GiB"
    if size >= GIB:
        return f"{size / GIB:.3g} GiB"
    return f"{size / MIB:.4g} MiB"


def fork_available() -> bool:
    import multiprocessing
    return "fork" in multiprocessing.get_all_start_methods()


_OWN_FIELDS = ("Private_Clean:", "Private_Dirty:", "Swap:")
_SHARED_FIELDS = ("Pss:", "SwapPss:")


def _resident(pid: int) -> int:
    """The memory a worker holds of its own, in bytes: its private pages, resident or
    swapped out (pages still shared with the parent since the fork are not the case's).
    Where /proc/PID/smaps_rollup is missing, the whole resident set.

    A worker with a helper process (:class:`Alongside`) shares with it every page it had
    when the helper was forked, which then is private to neither: the two are counted
    together by their proportional sets (Pss) and private swap, which hold each of those
    pages once, and also a share of the pages both still share with the parent, so that
    the figure is never below the memory the case takes."""
    return _pages(pid, _children(pid))


def _pages(pid: int, helpers: Sequence[int]) -> int:
    """:func:`_resident` of a worker whose helpers are known."""
    if not helpers:
        return _own(pid, _OWN_FIELDS)
    return sum(_own(process, _SHARED_FIELDS) for process in (pid, *helpers))


def _over_budget(pid: int, budget: int) -> bool:
    """Whether the worker (with its helpers) holds more than ``budget`` bytes. Its resident
    set and swap (/proc/PID/status, cheap to read) bound its own pages from above; only
    past the budget are the pages counted (smaps_rollup walks every page: read 20 times a
    second it took 7 % of a core beside a 250 MB worker)."""
    helpers = _children(pid)
    if sum(_rough(process) for process in (pid, *helpers)) <= budget:
        return False
    return _pages(pid, helpers) > budget


def _rough(pid: int) -> float:
    """Resident set plus swap of one process, in bytes (infinite where unreadable)."""
    try:
        with open(f"/proc/{pid}/status") as stream:
            sizes = [int(line.split()[1]) for line in stream
                     if line.startswith(("VmRSS:", "VmSwap:"))]
    except (OSError, ValueError, IndexError):
        return float("inf")
    return 1024 * sum(sizes) if sizes else float("inf")


def _children(pid: int) -> list[int]:
    try:
        with open(f"/proc/{pid}/task/{pid}/children") as stream:
            return [int(child) for child in stream.read().split()]
    except (OSError, ValueError):
        return []


def _own(pid: int, fields: tuple[str, ...]) -> int:
    try:
        with open(f"/proc/{pid}/smaps_rollup") as stream:
            return 1024 * sum(int(line.split()[1]) for line in stream
                              if line.startswith(fields))
    except (OSError, ValueError, IndexError):
        pass
    try:
        with open(f"/proc/{pid}/statm") as stream:
            return int(stream.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError):
        return 0


def _quiet_signals() -> None:
    """A forked process: no Ctrl-C of its own (its parent ends it), SIGTERM and SIGHUP end it."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    for signum in (signal.SIGTERM, signal.SIGHUP):
        signal.signal(signum, signal.SIG_DFL)


def _payload(function: Callable[..., Any], arguments: tuple, who: str) -> bytes:
    """``function(*arguments)`` as the pickled reply of a ``who`` ("worker", "helper")."""
    from multiprocessing.reduction import ForkingPickler  # with the reducers others register

    try:
        return bytes(ForkingPickler.dumps(_Returned(function(*arguments)),
                                          pickle.HIGHEST_PROTOCOL))
    except MemoryError:
        return pickle.dumps(_Raised("ran out of memory", memory=True))
    except BaseException as error:  # noqa: BLE001 - reported by the parent
        return pickle.dumps(_Raised(f"the {who} failed ({type(error).__name__}: {error})"))


def _received(index: int, reply: Any, exit_code: int | None, who: str) -> Any:
    """What a forked process sent back (``reply``: its unpickled reply, None where it sent
    none): the value, or :class:`Lost` saying how it ended."""
    if isinstance(reply, _Returned):
        return reply.value
    if isinstance(reply, _Raised):
        return Lost(index, reply.reason, memory=reply.memory)
    return Lost(index, _death(exit_code, who))


def _child(connection, function, arguments, memory_budget) -> None:
    """The worker: no Ctrl-C of its own (the parent ends it), an address-space backstop,
    the result sent back pickled."""
    _quiet_signals()
    if memory_budget is not None:
        try:
            import resource
            limit = 2 * memory_budget + GIB
            resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
        except (ImportError, ValueError, OSError):
            pass
    connection.send_bytes(_payload(function, arguments, "worker"))
    connection.close()


def run_tasks(function: Callable[..., R], arguments: Sequence[tuple], *, jobs: int,
              memory_budget: int | None = DEFAULT_MEMORY, hard_seconds: float | None = None,
              on_done: Callable[[int, R | Lost], None] | None = None) -> list[R | Lost]:
    """``function(*a)`` for each tuple in ``arguments``, each in a forked worker, at most
    ``jobs`` at once; returns the results in order, a :class:`Lost` where a worker ended
    without one. ``on_done(index, result)`` is called as each task finishes. Every worker is
    ended before this returns or raises (Ctrl-C, :class:`Stopped`)."""
    import multiprocessing
    from multiprocessing.connection import wait

    context = multiprocessing.get_context("fork")
    results: list[R | Lost | None] = [None] * len(arguments)
    pending = list(range(len(arguments)))
    running: dict[int, tuple] = {}      # index → (process, connection, started)
    try:
        while pending or running:
            while pending and len(running) < jobs:
                index = pending.pop(0)
                receiver, sender = context.Pipe(duplex=False)
                process = context.Process(target=_child, daemon=True,
                                          args=(sender, function, arguments[index], memory_budget))
                process.start()
                sender.close()
                running[index] = (process, receiver, time.monotonic())
            handles = {r[1]: i for i, r in running.items()}
            ready = wait(list(handles), timeout=POLL_SECONDS)
            for handle in ready:
                index = handles[handle]
                process, receiver, _started = running.pop(index)
                reply: _Returned | _Raised | None
                try:
                    reply = pickle.loads(receiver.recv_bytes())
                except (EOFError, OSError, pickle.UnpicklingError):
                    reply = None           # the worker died before it could send anything
                receiver.close()
                process.join()
                result: R | Lost = _received(index, reply, process.exitcode, "worker")
                results[index] = result
                if on_done is not None:
                    on_done(index, result)
            now = time.monotonic()
            for index, (process, receiver, started) in list(running.items()):
                over_memory = (memory_budget is not None
                               and _over_budget(process.pid, memory_budget))
                over_time = hard_seconds is not None and now - started > hard_seconds
                if over_memory or over_time:
                    _end(process)
                    receiver.close()
                    del running[index]
                    lost = (Lost(index, "ran past the memory budget", memory=True)
                            if over_memory else
                            Lost(index, "it ran past its time budget and did not "
                                        "stop (its worker process was ended)"))
                    results[index] = lost
                    if on_done is not None:
                        on_done(index, lost)
    finally:
        for process, receiver, _started in running.values():
            _end(process)
            receiver.close()
    return cast("list[R | Lost]", results)      # every index has its result or Lost


class Alongside:
    """One call run in a forked helper process while the caller goes on with other work
    (a spare core): :func:`start_alongside` starts it, :meth:`result` waits for its value.

    The helper is a plain ``os.fork`` (a worker is a daemonic multiprocessing process, which
    may not start multiprocessing children of its own). It ignores Ctrl-C (the caller ends
    it), ends itself within a fifth of a second once its parent is gone (a worker ended for
    its budget or killed leaves no helper running), and shares the case's memory budget: a
    worker's memory as the parent reads it (:func:`_resident`) includes its helper's. A
    helper that is still running when the caller leaves ``with`` (a time budget that ran
    out, an error, Ctrl-C) is ended there.
    """

    def __init__(self, pid: int, descriptor: int) -> None:
        self.pid = pid
        self._descriptor: int | None = descriptor
        self._outcome: Any = None

    def result(self) -> Any:
        """The call's value, or :class:`Lost` (index 0) where the helper ended without one."""
        if self._descriptor is None:
            return self._outcome
        chunks = []
        while chunk := os.read(self._descriptor, 1 << 20):
            chunks.append(chunk)
        self._close()
        _pid, status = os.waitpid(self.pid, 0)
        reply: _Returned | _Raised | None
        try:
            reply = pickle.loads(b"".join(chunks)) if chunks else None
        except (EOFError, pickle.UnpicklingError):
            reply = None
        code = -os.WTERMSIG(status) if os.WIFSIGNALED(status) else os.WEXITSTATUS(status)
        self._outcome = _received(0, reply, code, "helper")
        return self._outcome

    def end(self) -> None:
        """End the helper if it is still running (SIGKILL: it holds nothing to tidy)."""
        if self._descriptor is None:
            return
        self._close()
        try:
            os.kill(self.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        os.waitpid(self.pid, 0)
        self._outcome = Lost(0, "it was ended by the process that started it")

    def _close(self) -> None:
        if self._descriptor is not None:
            os.close(self._descriptor)
            self._descriptor = None

    def __enter__(self) -> Alongside:
        return self

    def __exit__(self, *_exc: object) -> None:
        self.end()


def start_alongside(function: Callable[..., Any], arguments: tuple = ()) -> Alongside:
    """``function(*arguments)`` in a forked helper process (see :class:`Alongside`); its
    value must be picklable. Only where :func:`fork_available`."""
    parent = os.getpid()
    descriptor, sender = os.pipe()
    pid = os.fork()
    if pid == 0:                                     # the helper
        code = 1
        try:
            os.close(descriptor)
            _helper(sender, parent, function, arguments)
            code = 0
        finally:
            os._exit(code)      # no atexit handlers, no flushing of the parent's buffers
    os.close(sender)
    return Alongside(pid, descriptor)


def _helper(sender: int, parent: int, function: Callable[..., Any], arguments: tuple) -> None:
    import threading

    _quiet_signals()
    signal.setitimer(signal.ITIMER_REAL, 0)         # the caller's time budget is the caller's
    threading.Thread(target=_watch_parent, args=(parent,), daemon=True).start()
    view = memoryview(_payload(function, arguments, "helper"))
    while view:
        view = view[os.write(sender, view):]
    os.close(sender)


def _watch_parent(parent: int) -> None:
    while os.getppid() == parent:
        time.sleep(0.2)
    os._exit(1)


def _end(process) -> None:
    """End a worker: SIGTERM, then SIGKILL if it has not gone within a second."""
    if process.is_alive():
        process.terminate()
        process.join(1.0)
    if process.is_alive():
        process.kill()
    process.join()


def _death(exit_code: int | None, who: str = "worker") -> str:
    if exit_code is not None and exit_code < 0:
        name = signal.Signals(-exit_code).name if -exit_code in signal.Signals._value2member_map_ \
            else f"signal {-exit_code}"
        hint = " (as the out-of-memory killer does)" if -exit_code == signal.SIGKILL else ""
        return f"its {who} process was killed by {name}{hint}"
    return f"its {who} process ended unexpectedly (exit status {exit_code})"


__all__ = ["DEFAULT_MEMORY", "Alongside", "Lost", "Stopped", "format_size", "install_stop_handlers",
           "restore_handlers", "run_tasks", "start_alongside"]
