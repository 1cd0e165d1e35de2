"""Each calc is analysed in its own process under time and memory limits.

One pathological calc (a runaway integration, a huge symbolic expansion)
cannot hang or exhaust the build: its process is stopped at the limit and the
calc fails alone with a clear message, while the rest of the project builds.
"""

from __future__ import annotations

import multiprocessing as mp
import pickle
import resource
import signal
import time
import warnings
from pathlib import Path
from typing import Callable

import numpy as np

from . import settings
from .errors import AnalysisError, CalcsheafError

TIME_LIMIT_S = settings.time_limit_s()            # validated: a bad value is refused
MEMORY_LIMIT_BYTES = settings.memory_limit_bytes()


_stage_channel = None


def stage(name: str) -> None:
    """Report that the calc being analysed has reached stage `name` (derive, solve, render).

    A no-op outside an isolated child process."""
    if _stage_channel is not None:
        try:
            _stage_channel.send_bytes(pickle.dumps(_Stage(name)))
        except OSError:
            pass


class _Stage:
    def __init__(self, name: str) -> None:
        self.name = name


def path_of(item) -> Path:
    """The calc file an item of work stands for: the item itself, or its `path`."""
    return getattr(item, "path", item)


def _child(fn: Callable, item, conn) -> None:
    global _stage_channel
    path = path_of(item)
    _stage_channel = conn
    signal.signal(signal.SIGTERM, signal.SIG_DFL)   # a worker stops at once when told to
    try:
        resource.setrlimit(resource.RLIMIT_AS, (MEMORY_LIMIT_BYTES, MEMORY_LIMIT_BYTES))
    except (ValueError, OSError):
        pass
    warnings.simplefilter("ignore")          # numerical warnings become checks, not noise
    np.seterr(all="ignore")
    try:
        result = fn(item)
    except MemoryError:
        result = _Failure(_limit_error(path, "ran out of its memory limit of "
                                       f"{MEMORY_LIMIT_BYTES / 2 ** 30:g} GiB"))
    except CalcsheafError as exc:
        result = _Failure(exc)
    except Exception as exc:  # a fault inside calcsheaf: this calc fails alone, with the reason
        result = _Failure(AnalysisError(
            f"the analysis stopped on an internal error ({type(exc).__name__}: {exc})", file=path,
            fix="report this calc file with the message; meanwhile simplify the expression involved"))
    try:
        conn.send_bytes(pickle.dumps(result))
    finally:
        conn.close()


class _Failure:
    """A child's refusal, sent back to the parent in place of a result."""

    def __init__(self, error: CalcsheafError) -> None:
        self.error = error


def _limit_error(path: Path, what: str) -> AnalysisError:
    return AnalysisError(f"the analysis {what} and was stopped", file=path,
                         fix="simplify the calc (fewer coordinates, shorter duration, fewer points) "
                             "or raise CALCSHEAF_CALC_TIME_LIMIT / CALCSHEAF_CALC_MEMORY_LIMIT_GB")


def run_isolated(fn: Callable, paths: list, jobs: int, on_failure: Callable,
                 progress: Callable[[Path, str], None] | None = None) -> list:
    """fn(item) for every item of `paths`, at most `jobs` at once, each in its own process.

    An item is a calc file's Path or an object with a `path` (e.g. the path and the
    bytes read from it, which the forked process inherits without a second read).
    A process that dies, overruns TIME_LIMIT_S or exhausts its memory gives
    on_failure(item, error) instead of a result.  Results keep the order of `paths`.
    """
    ctx = mp.get_context("fork")
    results: dict[int, object] = {}
    pending = list(enumerate(paths))
    running: dict[int, tuple] = {}
    try:
        _schedule(ctx, fn, pending, running, results, jobs, on_failure, progress)
    finally:   # interrupted or terminated: leave no worker behind, even one still starting
        for proc, receive, _, _ in running.values():
            receive.close()
        for proc in mp.active_children():
            proc.kill()
            proc.join()
    return [results[i] for i in range(len(paths))]


def _schedule(ctx, fn, pending, running, results, jobs, on_failure, progress) -> None:
    while pending or running:
        while pending and len(running) < max(1, jobs):
            i, item = pending.pop(0)
            receive, send = ctx.Pipe(duplex=False)
            proc = ctx.Process(target=_child, args=(fn, item, send), daemon=True)
            proc.start()
            send.close()
            running[i] = (proc, receive, time.monotonic(), item)
        for i, (proc, receive, started, item) in list(running.items()):
            path = path_of(item)
            if receive.poll(0.02):
                try:
                    value = pickle.loads(receive.recv_bytes())
                    if isinstance(value, _Stage):
                        if progress:
                            progress(path, value.name)
                        continue
                    results[i] = on_failure(item, value.error) if isinstance(value, _Failure) else value
                except (EOFError, OSError, pickle.UnpicklingError):
                    results[i] = on_failure(item, _limit_error(path, "process ended unexpectedly"))
                proc.join()
            elif not proc.is_alive():
                results[i] = on_failure(item, _limit_error(path, f"process ended (exit code {proc.exitcode})"))
            elif time.monotonic() - started > TIME_LIMIT_S:
                proc.kill()
                proc.join()
                results[i] = on_failure(item, _limit_error(path, f"exceeded its time limit of {TIME_LIMIT_S:g} s"))
            else:
                continue
            receive.close()
            del running[i]
            if progress:
                progress(path, "done")
