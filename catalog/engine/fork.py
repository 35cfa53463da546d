"""Run functions in forked children with hard limits, streaming results back through pipes.

One helper for every "do this in a child process that cannot run away" in gravicat: the
per-chart children of ``gravicat check``, and (to be moved onto it) the time-limited proofs of
:mod:`gravicat.engine.geometry`, :mod:`gravicat.physics.equivalence` and :mod:`gravicat.repair`.

A task is a function ``fn(emit)``. In the child it may call ``emit(item)`` any number of times
(each picklable ``item`` reaches the parent at once, so partial results survive a child that is
stopped later); its return value is the task's ``value``. The parent gets a :class:`Outcome`:

* ``finished`` - ``fn`` returned; ``value`` is its return value;
* ``error`` - ``fn`` raised; ``exception`` is the exception rebuilt in the parent (also for
  exceptions whose ``__init__`` takes other arguments than their message, such as
  :class:`gravicat.errors.InputError`), ``error`` its text and ``traceback`` the child's traceback;
* ``limit`` - ``"cpu"`` (the child reached its CPU-time cap: ``RLIMIT_CPU``, a signal from the
  kernel), ``"wall"`` (the parent's watchdog: the child took longer than ``wall_seconds``) or
  ``"memory"`` (the child reached its memory cap: a ``MemoryError``, or an abort of a C library
  that could not allocate); ``None`` otherwise. ``items`` then holds what the child emitted before it was stopped;
* ``died`` - the child ended without a result for another reason (``exitcode`` says how).

Limits: ``cpu_seconds`` is CPU time of the child itself (so a loaded machine does not turn work
into a timeout), enforced to the fraction of a second by a profiling timer (``ITIMER_PROF``; it
acts when the interpreter next runs), with the kernel's whole-second ``RLIMIT_CPU`` as a backstop
inside long C calls; ``wall_seconds`` is a
backstop in elapsed time (a child that sleeps, or waits on a grandchild). Each child leads its
own process group, and a stopped child is killed with its whole group, so grandchildren (a
verifier's own time-limited proofs) do not outlive it. Children are not daemonic, so the task
may fork children of its own.

Output: a child's standard output goes to /dev/null (what it computes travels through its pipe,
and nothing it prints may mix into the command's own output); its standard error is the parent's.

Memory: every child gets an address-space cap (``RLIMIT_AS``) of what it inherits at the fork plus
:data:`MEMORY_CAP_BYTES` (default :data:`DEFAULT_MEMORY_CAP_BYTES`, 3 GiB; ``memory-cap`` in the
settings, set through :func:`set_memory_cap`), so a chart that would need more memory ends as a
``"memory"`` limit instead of a machine that swaps or an out-of-memory kill. Children die with
their parent: each asks the kernel for ``SIGKILL`` when its parent ends (Linux ``PR_SET_PDEATHSIG``),
so a ``kill -9`` of the command leaves no worker behind.

Where ``fork`` is not available (or ``in_process=True``), tasks run one after the other in this
process with the same :class:`Outcome` (no limits can be enforced there; ``limit`` stays None).

Usage::

    from gravicat.engine.fork import run_forked, run_many

    out = run_forked(lambda emit: expensive(), cpu_seconds=30)
    out.value if out.finished else out.limit or out.error

    outs = run_many([task_a, task_b, task_c], jobs=2, cpu_seconds=[60, 60, 5])   # input order
"""

from __future__ import annotations

import math
import os
import pickle
import signal
import sys
import time
import traceback
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

Task = Callable[[Callable[[Any], None]], Any]

DEFAULT_MEMORY_CAP_BYTES = 3 * 1024**3
MEMORY_CAP_BYTES: int | None = DEFAULT_MEMORY_CAP_BYTES  # None: no cap


def set_memory_cap(cap_bytes: int | None) -> None:
    """Set the address space each child may add to what it inherits (None or 0: no cap)."""
    global MEMORY_CAP_BYTES
    MEMORY_CAP_BYTES = int(cap_bytes) if cap_bytes else None


def memory_cap_text() -> str:
    """The memory cap of a child as text: ``"512 MiB"``, ``"3 GiB"`` or ``"no cap"``."""
    if not MEMORY_CAP_BYTES:
        return "no cap"
    mib = MEMORY_CAP_BYTES / 1024**2
    return f"{mib / 1024:g} GiB" if mib >= 1024 and mib % 1024 == 0 else f"{mib:g} MiB"


def describe_limit(outcome: Outcome, cpu_seconds: float | None = None, wall_seconds: float | None = None) -> str:
    """Why a child that reached a limit was stopped, in the words every caller uses: ``"memory cap
    (512 MiB) reached"``, ``"CPU-time cap of 20 s reached"``, ``"elapsed-time cap of 60 s reached"``
    (the caps the caller gave; without them the sentence has no number). For an outcome without a
    limit, how it ended instead (its error, or its exit code)."""
    if outcome.limit == "memory":
        return f"memory cap ({memory_cap_text()}) reached"
    if outcome.limit == "cpu":
        return "CPU-time cap reached" if cpu_seconds is None else f"CPU-time cap of {cpu_seconds:g} s reached"
    if outcome.limit == "wall":
        return ("elapsed-time cap reached" if wall_seconds is None
                else f"elapsed-time cap of {wall_seconds:g} s reached")
    if outcome.error is not None:
        return outcome.error
    return f"the child process ended without a result (exit code {outcome.exitcode})"


@dataclass
class Outcome:
    """What one task did (see the module docstring)."""

    items: list[Any] = field(default_factory=list)
    value: Any = None
    finished: bool = False
    exception: BaseException | None = None
    error: str | None = None
    traceback: str = ""
    limit: str | None = None  # "cpu" | "wall" | "memory" | None
    died: bool = False
    exitcode: int | None = None
    seconds: float = 0.0  # elapsed (wall) seconds seen by the parent
    forked: bool = False

    def reraise(self) -> None:
        """Raise the child's exception here (its traceback text is attached as a note)."""
        if self.exception is not None:
            if self.forked and self.traceback and hasattr(self.exception, "add_note"):
                self.exception.add_note("in the forked child:\n" + self.traceback.rstrip())
            raise self.exception
        if self.error is not None:
            raise RuntimeError(f"{self.error}\nin the forked child:\n{self.traceback}")


def fork_available() -> bool:
    """True where children can be forked (POSIX); elsewhere tasks run in-process."""
    try:
        import multiprocessing

        multiprocessing.get_context("fork")
    except (ImportError, ValueError):  # pragma: no cover - platforms without fork
        return False
    return True


def default_jobs() -> int:
    """The number of cores this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def run_forked(fn: Task, *, cpu_seconds: float | None = None, wall_seconds: float | None = None,
               in_process: bool = False) -> Outcome:
    """Run one task in a forked child (see the module docstring)."""
    return run_many([fn], jobs=1, cpu_seconds=[cpu_seconds], wall_seconds=[wall_seconds],
                    in_process=in_process)[0]


def run_bounded(fn: Callable[[], Any], *, cpu_seconds: float, what: str, hint: str = "") -> Any:
    """``fn()`` in a forked child under a CPU-time cap of ``cpu_seconds`` (wall backstop ``2 * cpu + 10``)
    and the memory cap: its value, or its own exception raised again here (a
    :class:`gravicat.errors.CatalogError` keeps its one-line message), or, when a cap was reached, the
    one-line :class:`gravicat.errors.CheckFailed` (exit 1, as ``invariants`` past its budget)
    ``"<what> stopped (<limit>); nothing written; <hint>"``. For the commands that work on file
    content outside the per-chart children of ``check`` (export, probe): never a hang, never an
    out-of-memory kill."""
    from gravicat.errors import CatalogError, CheckFailed

    wall = 2 * cpu_seconds + 10
    out = run_forked(lambda emit: fn(), cpu_seconds=cpu_seconds, wall_seconds=wall)
    if out.finished:
        return out.value
    if out.limit is not None:
        tail = f"; {hint}" if hint else ""
        raise CheckFailed(f"{what} stopped ({describe_limit(out, cpu_seconds, wall)}); nothing written{tail}")
    if isinstance(out.exception, CatalogError):
        raise out.exception
    if out.exception is not None:
        out.reraise()
    if out.died:
        raise CatalogError(f"{what} stopped unexpectedly (exit code {out.exitcode})")
    raise CatalogError(f"{what} failed: {out.error}")


def run_many(tasks: Sequence[Task], *, jobs: int = 1, cpu_seconds: Sequence[float | None] | float | None = None,
             wall_seconds: Sequence[float | None] | float | None = None, in_process: bool = False,
             on_item: Callable[[int, Any], None] | None = None) -> list[Outcome]:
    """Run ``tasks`` in forked children, at most ``jobs`` at a time, started in input order.

    ``cpu_seconds`` / ``wall_seconds``: one limit for all, or one per task (None: no limit; a CPU
    cap without a wall limit gets the backstop ``4 * cpu + 30`` seconds). ``on_item(i, item)`` is
    called in the parent as items of task ``i`` arrive. Returns one :class:`Outcome` per task, in
    input order.
    """
    n = len(tasks)
    cpus = _per_task(cpu_seconds, n)
    walls = _per_task(wall_seconds, n)
    if in_process or not fork_available():
        return [_run_here(fn, (lambda item, i=i: on_item(i, item)) if on_item else None)
                for i, fn in enumerate(tasks)]
    import gc
    import multiprocessing
    from multiprocessing.connection import wait

    ctx = multiprocessing.get_context("fork")
    outcomes = [Outcome(forked=True) for _ in range(n)]
    # Python's advice for fork without exec: freeze what exists, so that the children's garbage
    # collections neither scan nor touch (copy) the parent's objects; undone when all are done.
    gc.freeze()
    running: dict[Any, tuple[int, Any, float, float | None]] = {}  # conn -> (index, process, start, deadline)
    pending = list(range(n))
    jobs = max(1, int(jobs))

    exits: dict[Any, int | None] = {}  # conn -> pidfd of its child (ready when the child has ended)

    def drain(conn, i: int) -> None:
        # what is already in the pipe (a grandchild may still hold its other end: no EOF to wait for)
        while conn.poll():
            if not _receive(conn, outcomes[i], on_item, i):
                break

    try:
        while pending or running:
            while pending and len(running) < jobs:
                i = pending.pop(0)
                recv, send = ctx.Pipe(duplex=False)
                proc = ctx.Process(target=_child, args=(tasks[i], send, cpus[i], MEMORY_CAP_BYTES, os.getpid()),
                                   daemon=False)
                proc.start()
                send.close()
                try:
                    os.setpgid(proc.pid, proc.pid)  # also from this side: no window before the child does it
                except OSError:
                    pass
                wall = walls[i]
                if wall is None and cpus[i] is not None:
                    wall = 4 * cpus[i] + 30
                start = time.monotonic()
                running[recv] = (i, proc, start, None if wall is None else start + wall)
                exits[recv] = _exit_handle(proc)
            deadlines = [d for (_i, _p, _s, d) in running.values() if d is not None]
            timeout = max(0.0, min(deadlines) - time.monotonic()) if deadlines else None
            if any(h is None for h in exits.values()):  # no pidfd: look at the children now and then
                timeout = 0.25 if timeout is None else min(timeout, 0.25)
            handles = {h: conn for conn, h in exits.items() if h is not None}
            ready = wait([*running, *handles], timeout)
            ended = {handles[r] for r in ready if r in handles}
            ended |= {conn for conn, h in exits.items() if h is None and not running[conn][1].is_alive()}
            for conn in [r for r in ready if r in running]:
                i = running[conn][0]
                if not _receive(conn, outcomes[i], on_item, i):
                    ended.add(conn)  # EOF: the child closed its end
            for conn in ended:
                i, proc, start, _deadline = running.pop(conn)
                drain(conn, i)  # what is left in the pipe (a grandchild may still hold its other end)
                _close_handle(exits.pop(conn))
                _finish(conn, proc, outcomes[i], start, limit=None)
            now = time.monotonic()
            for conn, (i, proc, start, deadline) in list(running.items()):
                if deadline is not None and now >= deadline:
                    drain(conn, i)  # keep what arrived just before the watchdog fired
                    del running[conn]
                    _close_handle(exits.pop(conn))
                    _finish(conn, proc, outcomes[i], start, limit="wall")
    finally:
        for conn, (i, proc, start, _deadline) in running.items():  # interrupted: leave nothing behind
            _close_handle(exits.pop(conn, None))
            _finish(conn, proc, outcomes[i], start, limit="wall")
        gc.unfreeze()
    return outcomes


def _exit_handle(proc) -> int | None:
    """A pidfd of ``proc``: readable once the process has ended, whoever else holds its pipes
    (a grandchild inherits the child's end of the result pipe, so EOF alone can come late)."""
    try:
        return os.pidfd_open(proc.pid)
    except (AttributeError, OSError):  # pragma: no cover - not Linux 5.3+
        return None


def _close_handle(handle: int | None) -> None:
    if handle is not None:
        try:
            os.close(handle)
        except OSError:  # pragma: no cover
            pass


def _per_task(value, n: int) -> list[float | None]:
    if value is None or isinstance(value, (int, float)):
        return [value] * n
    values = list(value)
    if len(values) != n:
        raise ValueError(f"{len(values)} limits for {n} tasks")
    return values


def _run_here(fn: Task, on_item) -> Outcome:
    out = Outcome()
    start = time.monotonic()

    def emit(item):
        out.items.append(item)
        if on_item is not None:
            on_item(item)

    try:
        out.value = fn(emit)
        out.finished = True
    except Exception as exc:  # noqa: BLE001 - handed to the caller as the task's outcome
        out.exception, out.error = exc, _describe(exc)
        out.traceback = traceback.format_exc()
    out.seconds = time.monotonic() - start
    return out


# --------------------------------------------------------------------------- child side


def _child(fn: Task, send, cpu_seconds: float | None, memory_bytes: int | None = None,
           parent: int | None = None) -> None:
    """Body of a forked child: own process group, dies with its parent, CPU and memory caps, run,
    report; never returns normally."""
    try:
        os.setpgid(0, 0)
    except OSError:  # pragma: no cover - already a group leader
        pass
    _die_with_parent(parent)
    _quiet_stdout()
    _limit_cpu(cpu_seconds)
    _limit_memory(memory_bytes)
    code = 0
    try:
        value = fn(lambda item: send.send(("item", item)))
        _send_safely(send, ("value", value))
    except MemoryError:
        _send_safely(send, ("memory",))
    except Exception as exc:  # noqa: BLE001 - reported to the parent, which decides
        _send_safely(send, ("raise", _portable(exc), _describe(exc), traceback.format_exc()))
    except BaseException:  # SystemExit, KeyboardInterrupt: end without a result
        code = 1
    finally:
        try:
            send.close()
        except OSError:  # pragma: no cover
            pass
    os._exit(code)  # no atexit handlers, no flushing of the parent's buffered output


def _quiet_stdout() -> None:
    """Point the child's standard output at /dev/null: results travel through the pipe only, and a C
    library's own message (flint prints "Unable to allocate memory" on stdout before it aborts at the
    memory cap) must not land in the command's output (a ``--json`` document). Standard error stays."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
    except OSError:  # pragma: no cover
        return
    try:
        os.dup2(devnull, 1)
    except OSError:  # pragma: no cover
        pass
    finally:
        os.close(devnull)


def _limit_cpu(seconds: float | None) -> None:
    try:
        import resource
    except ImportError:  # pragma: no cover - not POSIX
        return
    try:
        resource.setrlimit(resource.RLIMIT_CORE, (0, 0))  # SIGXCPU would otherwise dump core
    except (ValueError, OSError):  # pragma: no cover
        pass
    if seconds is None:
        return
    # the exact budget: a profiling timer counts the same CPU time (user + system); at its end the
    # child ends itself by the signal of the kernel's cap (SIGXCPU, default action), as soon as the
    # interpreter runs again; the kernel's whole-second cap is the backstop inside long C calls
    try:
        signal.signal(signal.SIGXCPU, signal.SIG_DFL)
        signal.signal(signal.SIGPROF, lambda *_: os.kill(os.getpid(), signal.SIGXCPU))
        signal.setitimer(signal.ITIMER_PROF, max(float(seconds), 0.001))
    except (AttributeError, ValueError, OSError):  # pragma: no cover - no profiling timer here
        pass
    cpu = max(1, math.ceil(seconds))
    try:
        _soft, hard = resource.getrlimit(resource.RLIMIT_CPU)
        if hard == resource.RLIM_INFINITY or hard > cpu:
            resource.setrlimit(resource.RLIMIT_CPU, (cpu, hard))
    except (ValueError, OSError):  # pragma: no cover - no resource limits here
        pass


def _die_with_parent(parent: int | None) -> None:
    """Ask the kernel to kill this child when its parent ends (Linux ``PR_SET_PDEATHSIG``); if the
    parent already ended before the request took effect, end now."""
    if not sys.platform.startswith("linux"):  # pragma: no cover - elsewhere the group kill still applies
        return
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0)
    except (OSError, AttributeError):  # pragma: no cover - no prctl here
        return
    if parent is not None and os.getppid() != parent:  # the parent ended before the request
        os._exit(1)


_PR_SET_PDEATHSIG = 1


def _limit_memory(cap: int | None) -> None:
    """Cap the address space at what the child inherited plus ``cap`` bytes (``RLIMIT_AS``)."""
    if not cap:
        return
    try:
        import resource
    except ImportError:  # pragma: no cover - not POSIX
        return
    try:
        limit = _address_space() + int(cap)
        _soft, hard = resource.getrlimit(resource.RLIMIT_AS)
        if hard != resource.RLIM_INFINITY:
            limit = min(limit, hard)
        resource.setrlimit(resource.RLIMIT_AS, (limit, hard))
    except (ValueError, OSError):  # pragma: no cover - no resource limits here
        pass


def _address_space() -> int:
    """This process's virtual memory size in bytes (0 where /proc is not available)."""
    try:
        with open("/proc/self/statm") as f:
            return int(f.read().split()[0]) * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError):  # pragma: no cover - not Linux
        return 0


def _send_safely(send, message) -> None:
    try:
        send.send(message)
    except Exception as exc:  # noqa: BLE001 - e.g. an unpicklable value: say so instead
        send.send(("raise", None, f"the result could not be sent to the parent: {_describe(exc)}",
                   traceback.format_exc()))


def _describe(exc: BaseException) -> str:
    return f"{type(exc).__name__}: {exc}"


def _portable(exc: BaseException):
    """A picklable recipe for ``exc``: (class, args, __dict__), or None when it cannot travel."""
    recipe = (type(exc), exc.args, dict(getattr(exc, "__dict__", {})))
    try:
        pickle.loads(pickle.dumps(recipe))
    except Exception:  # noqa: BLE001 - the parent gets the text instead
        return None
    return recipe


def _rebuild(recipe) -> BaseException | None:
    if recipe is None:
        return None
    cls, args, state = recipe
    try:
        exc = cls.__new__(cls, *args)
        BaseException.__init__(exc, *args)
        exc.__dict__.update(state)
    except Exception:  # noqa: BLE001
        return None
    return exc


# --------------------------------------------------------------------------- parent side


def _receive(conn, out: Outcome, on_item, i: int) -> bool:
    """Read one message; False when the child has closed its end (finished or died)."""
    try:
        message = conn.recv()
    except (EOFError, OSError):
        return False
    kind = message[0]
    if kind == "item":
        out.items.append(message[1])
        if on_item is not None:
            on_item(i, message[1])
    elif kind == "value":
        out.value, out.finished = message[1], True
    elif kind == "memory":
        out.limit = "memory"
    elif kind == "raise":
        out.exception = _rebuild(message[1])
        out.error, out.traceback = message[2], message[3]
    return True


def _finish(conn, proc, out: Outcome, start: float, *, limit: str | None) -> None:
    complete = out.finished or out.error is not None
    if out.limit == "memory":  # the child said so before it ended
        limit = "memory"
    if limit is not None or not complete:
        # stopped, or ended without a result (its CPU cap): end its process group too. Before
        # join(), so the pid is not reaped yet and cannot belong to anything else.
        _kill_group(proc)
    proc.join(5)
    if proc.is_alive():  # pragma: no cover - a child that ignores the end of its pipe
        _kill_group(proc)
        proc.join(5)
    try:
        conn.close()
    except OSError:  # pragma: no cover
        pass
    out.exitcode = proc.exitcode
    out.seconds = time.monotonic() - start
    if complete:
        return
    if limit is not None:
        out.limit = limit
    elif proc.exitcode == -signal.SIGXCPU:
        out.limit = "cpu"
    elif MEMORY_CAP_BYTES and proc.exitcode == -signal.SIGABRT:
        out.limit = "memory"  # a C library (GMP, flint) aborts when an allocation under the cap fails
    else:
        out.died = True


def _kill_group(proc) -> None:
    pid = proc.pid
    if pid is None:
        return
    try:
        os.killpg(pid, signal.SIGKILL)
    except OSError:  # no such group (it never became one, or it is gone)
        if proc.is_alive():
            proc.kill()
