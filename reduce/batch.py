"""Reducing many sheet rows at once: over the machine's cores, in order, with progress.

Rows of a test sheet are independent, so :func:`reduce_rows` hands them to
worker processes (forked children that take tasks from a pipe, see
:func:`_forked`, or a :class:`concurrent.futures.ProcessPoolExecutor` where
the machine cannot fork; processes, not threads, because most of a row's
time is Python code that holds the GIL).  Each worker runs :func:`reduce.pipeline.reduce_specimen`,
the same function a sequential run calls, and the results are put back in
sheet order, so a parallel run gives the same results, row for row, as
``jobs=1``, which runs in this process.

Nothing a row does stops the batch: errors the pipeline expects are already
in ``Result.error``; any other exception in a worker becomes that row's
error ("internal error while reducing: …"), and a worker process that dies
(killed, out of memory) costs only the row it was reducing, which is tried
once more on its own before it is reported.

:func:`reduce_sheets` does this for several sheets, or folders of sheets,
together (their rows share one pool) and says which sheet each result
belongs to; a sheet that cannot be used at all is reported and the others
are still reduced.
"""

from __future__ import annotations

import os
import signal
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import NamedTuple

from reduce.errors import CracktipError, SheetError

__all__ = ["BatchRow", "Batch", "available_cores", "find_sheets", "progress_wanted",
           "reduce_rows", "reduce_sheets"]

#: file types a folder is searched for; a file is a sheet when its header
#: names these columns (the ones every sheet has, see reduce.sheet.REQUIRED)
_SHEET_SUFFIXES = (".csv", ".tsv", ".txt", ".xlsx", ".xlsm")
_SHEET_MARKS = frozenset({"specimen", "geometry", "record"})
#: most rows sent to a worker at once
_CHUNK_ROWS = 16
#: workers are forked children where the machine can fork (see _forked), else an executor's
_CAN_FORK = hasattr(os, "fork")


class BatchRow(NamedTuple):
    """One reduced row: its result, its record (or None), the row, and its sheet."""

    result: object
    record: object
    row: object
    sheet: str


@dataclass
class Batch:
    """The outcome of :func:`reduce_sheets`.

    Attributes
    ----------
    rows : list of BatchRow
        Every row of every usable sheet, sheets in the order given, rows in
        sheet order.
    sheets : list of str
        The sheets found, in that order.
    errors : list of str
        One message per sheet (or folder) that could not be used at all.
    """

    rows: list = field(default_factory=list)
    sheets: list = field(default_factory=list)
    errors: list = field(default_factory=list)

    def triples(self) -> list:
        """The rows as (Result, Record, row), the form :func:`reduce.pipeline.reduce_sheet` returns."""
        return [(r.result, r.record, r.row) for r in self.rows]


def available_cores() -> int:
    """The number of cores this process may run on (at least 1)."""
    try:
        return max(len(os.sched_getaffinity(0)), 1)
    except (AttributeError, OSError):
        return max(os.cpu_count() or 1, 1)


def progress_wanted(quiet: bool = False, stream=None) -> bool:
    """A progress bar only on a terminal, and not when asked to be quiet."""
    stream = sys.stderr if stream is None else stream
    try:
        return not quiet and stream.isatty()
    except (AttributeError, ValueError):
        return False


def find_sheets(inputs) -> tuple[list[Path], list[str]]:
    """The test sheets among files and folders.

    A file given is taken as a sheet.  A folder is searched (with its
    subfolders, in name order) for CSV, TSV, text and XLSX files whose first
    line names the columns ``specimen``, ``geometry`` and ``record``; the
    records beside the sheets do not.

    Returns
    -------
    (list of Path, list of str)
        The sheets, and one message per input that is missing or a folder
        without sheets.
    """
    sheets, errors = [], []
    for item in inputs:
        path = Path(item)
        if path.is_dir():
            found = [p for p in sorted(path.rglob("*"))
                     if p.suffix.lower() in _SHEET_SUFFIXES and p.is_file()
                     and not any(part.startswith(".") for part in p.relative_to(path).parts)
                     and _looks_like_sheet(p)]
            if not found:
                errors.append(f"{path}: no test sheet in this folder (a sheet is a CSV or XLSX "
                              "file whose header names the columns specimen, geometry and record)")
            sheets.extend(found)
        elif path.is_file():
            sheets.append(path)
        else:
            errors.append(f"{path}: the test sheet does not exist or is not a file")
    return sheets, errors


def _looks_like_sheet(path: Path) -> bool:
    if path.suffix.lower() in (".xlsx", ".xlsm"):
        return _xlsx_header_marks(path)
    try:
        with open(path, "rb") as f:
            head = f.read(64 * 1024)
    except OSError:
        return False
    if b"\x00" in head:
        return False
    text = head.decode("utf-8-sig", errors="replace")
    first = next((line for line in text.splitlines() if line.strip()), "")
    names = {name.strip().strip('"').strip() for sep in ",;\t" for name in first.split(sep)}
    return _SHEET_MARKS <= names


def _xlsx_header_marks(path: Path) -> bool:
    from reduce.records import check_workbook

    try:
        check_workbook(path)  # the container limits of the record reader (ZIP bombs)
        import openpyxl

        book = openpyxl.load_workbook(path, read_only=True, data_only=True, keep_links=False)
        try:
            first = next(book.worksheets[0].iter_rows(max_row=1, values_only=True), ())
        finally:
            book.close()
    except Exception:  # not a workbook we can read: then not a sheet either
        return False
    return _SHEET_MARKS <= {str(c).strip() for c in first if c is not None}


def reduce_sheets(inputs, rules: str = "e399", *, jobs: int | None = None, progress: bool = False,
                  keep_records: bool = True) -> Batch:
    """Reduce every row of several sheets (or folders of sheets) together.

    Parameters
    ----------
    inputs : iterable of str or Path
        Sheets and folders (see :func:`find_sheets`).
    rules : {"e399", "iso12737"}
        The rule set.
    jobs, progress, keep_records
        As for :func:`reduce_rows`.

    Returns
    -------
    Batch

    Raises
    ------
    RulesError
        For an unknown rule set (before any work is done).
    """
    from reduce import rules as R
    from reduce.sheet import read_sheet

    R.rule_set(rules)
    paths, errors = find_sheets(inputs)
    batch = Batch(errors=errors)
    rows, sheet_of = [], []
    for path in paths:
        try:
            sheet_rows = read_sheet(path)
        except CracktipError as exc:
            batch.errors.append(str(exc))
            continue
        except OSError as exc:
            batch.errors.append(str(SheetError(f"cannot be read ({exc.strerror or exc})", file=str(path))))
            continue
        batch.sheets.append(str(path))
        rows.extend(sheet_rows)
        sheet_of.extend([str(path)] * len(sheet_rows))
    done = reduce_rows(rows, rules, jobs=jobs, progress=progress, keep_records=keep_records)
    batch.rows = [BatchRow(result, rec, row, sheet)
                  for (result, rec), row, sheet in zip(done, rows, sheet_of)]
    return batch


def reduce_rows(rows, rules: str = "e399", *, jobs: int | None = None, progress: bool = False,
                keep_records: bool = True) -> list:
    """Reduce sheet rows, in parallel over ``jobs`` processes, in their order.

    Parameters
    ----------
    rows : list of Specimen or BadRow
        As :func:`reduce.sheet.read_sheet` returns them.
    rules : {"e399", "iso12737"}
        The rule set.
    jobs : int, optional
        Worker processes; None for every available core.  With 1 (or a
        single row to reduce) the rows are reduced in this process.
    progress : bool
        Show a progress bar on standard error (see :func:`progress_wanted`).
    keep_records : bool
        Return the records read (reports draw them); False returns None in
        their place and spares sending long records between processes.

    Returns
    -------
    list of (Result, Record or None)
        One per row, in the order of ``rows``.  A BadRow gives a result
        carrying its error.  This function does not raise for bad data.
    """
    from reduce.pipeline import failed_result
    from reduce.sheet import BadRow

    out = [None] * len(rows)
    todo = []
    for i, row in enumerate(rows):
        if isinstance(row, BadRow):
            out[i] = (failed_result(row.specimen, rules, row.error, heat=row.heat,
                                    geometry=row.geometry, record=row.record), None)
        else:
            todo.append(i)
    workers = min(available_cores() if jobs is None else max(int(jobs), 1), len(todo))
    bar = _Progress(len(rows), progress)
    bar.update(len(rows) - len(todo))
    try:
        if workers <= 1:
            for i in todo:
                out[i] = reduce_guarded(rows[i], rules, keep_records)
                bar.update(1)
        else:
            _in_pool(rows, todo, out, rules, keep_records, workers, bar)
    finally:
        bar.close()
    return out


def reduce_guarded(row, rules: str, keep_record: bool = True):
    """:func:`reduce.pipeline.reduce_specimen`, with any unexpected exception made the row's error."""
    from reduce.pipeline import reduce_specimen

    try:
        result, rec = reduce_specimen(row, rules)
    except (Exception, SystemExit) as exc:  # the whole-row guard: a bug must not stop the batch
        return (_internal_error(row, rules, f"{type(exc).__name__}: {exc}"), None)
    return result, (rec if keep_record else None)


def _internal_error(row, rules, what):
    from reduce.pipeline import failed_result

    return failed_result(getattr(row, "specimen", "?"), rules,
                         f"internal error while reducing: {what}",
                         heat=getattr(row, "heat", None), geometry=getattr(row, "geometry", None),
                         record=getattr(row, "record", None))


def _pool(workers):
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    # where this machine cannot fork (see _in_pool); fork where it exists
    methods = multiprocessing.get_all_start_methods()
    context = multiprocessing.get_context("fork" if "fork" in methods else None)
    return ProcessPoolExecutor(max_workers=workers, mp_context=context)


def _reduce_chunk(rows, rules, keep_records):
    return [reduce_guarded(row, rules, keep_records) for row in rows]


def _sendable_chunk(rows, rules, keep_records):
    """:func:`_reduce_chunk` for the executor, each result checked to be picklable, so that
    one that is not costs only its own row (the results are pickled once more to send)."""
    return [_picklable(one, row, rules) for one, row in zip(_reduce_chunk(rows, rules, keep_records),
                                                            rows)]


def _chunks(todo, workers):
    """The row indices cut into tasks that shrink towards the end.

    A few rows per task: fewer messages between the processes.  Each task
    is at most a quarter of the rows left per worker, so the last tasks hold
    one row and no worker waits long for another to finish its last task.
    """
    chunks, k = [], 0
    while k < len(todo):
        size = max(1, min(_CHUNK_ROWS, (len(todo) - k) // (4 * workers)))
        chunks.append(todo[k:k + size])
        k += size
    return chunks


def _in_pool(rows, todo, out, rules, keep_records, workers, bar):
    chunks = _chunks(todo, workers)
    run = _forked if _CAN_FORK else _in_executor
    lost = run(rows, chunks, out, rules, keep_records, workers, bar, in_process_fallback=True)
    # a worker died: every row it had not finished is tried again, alone, so
    # only the row that kills a worker is lost
    for i in sorted(lost):
        if run(rows, [[i]], out, rules, keep_records, 1, bar, in_process_fallback=False):
            out[i] = (_internal_error(rows[i], rules, "the worker process stopped while reducing "
                                      "this row (out of memory, or killed)"), None)
            bar.update(1)


def _in_executor(rows, chunks, out, rules, keep_records, workers, bar, in_process_fallback=True):
    """The tasks in a ProcessPoolExecutor; returns the rows of tasks lost with a worker.

    ``in_process_fallback`` is taken for the same call as :func:`_forked` and not
    used: an executor that cannot start its processes reports its tasks lost.
    """
    from concurrent.futures import as_completed
    from concurrent.futures.process import BrokenProcessPool

    lost = []
    with _pool(workers) as pool:
        futures = {pool.submit(_sendable_chunk, [rows[i] for i in chunk], rules, keep_records): chunk
                   for chunk in chunks}
        try:
            for future in as_completed(futures):
                chunk = futures[future]
                try:
                    _put(out, chunk, future.result(), rules, rows)
                except BrokenProcessPool:
                    lost.extend(chunk)
                    continue
                except (Exception, SystemExit) as exc:  # e.g. a result that cannot be sent back
                    _put(out, chunk, exc, rules, rows)
                bar.update(len(chunk))
        except KeyboardInterrupt:  # stop now: the tasks not begun are dropped, the workers stopped
            pool.shutdown(wait=False, cancel_futures=True)
            for process in list((getattr(pool, "_processes", None) or {}).values()):
                process.terminate()  # the executor's own processes (no public way to stop them)
            raise
    return lost


def _put(out, chunk, done, rules, rows):
    """A task's results into their rows (or, for an exception, its message as their error)."""
    if isinstance(done, BaseException):
        for i in chunk:
            out[i] = (_internal_error(rows[i], rules, f"{type(done).__name__}: {done}"), None)
        return
    for i, one in zip(chunk, done, strict=True):
        out[i] = one


# -- forked workers ------------------------------------------------------------------
#
# Where the machine can fork, the workers are forked children that inherit the
# rows (nothing is sent to them but task numbers) and take tasks from one pipe
# until it is empty and closed: a worker starts its next task the moment it has
# sent the last one back, and this process only writes task numbers and reads
# results.  When one dies, the rows with no result are known (its task in hand,
# and any task no worker took).  This is leaner than the executor
# (no thread, no per-task message to the worker, no multiprocessing import),
# which is what decides the speed-up on two cores.

_TASK = 4  # bytes of a task number; writes of whole numbers up to PIPE_BUF are atomic
_HEADER = 9  # kind (1 byte: R results, P results pickled row by row) + task (4) + length (4)


def _forked(rows, chunks, out, rules, keep_records, workers, bar, in_process_fallback=True):
    """The tasks in forked workers; returns the rows of tasks lost with a worker.

    When not even one worker can be started (the machine refuses a fork),
    the tasks are reduced here, or, with ``in_process_fallback`` False,
    returned as lost.
    """
    import pickle
    import selectors

    for stream in (sys.stdout, sys.stderr):  # a child must not inherit unwritten output
        stream.flush()
    task_r, task_w = os.pipe()
    os.set_blocking(task_w, False)
    pending = b"".join(k.to_bytes(_TASK, "little") for k in range(len(chunks)))
    children = {}  # result pipe -> (pid, bytes received and not yet read as messages)
    finished = False
    try:
        for _ in range(min(workers, len(chunks))):
            res_r, res_w = os.pipe()
            _widen(res_w)
            # Ctrl-C waits until the worker is started and known here (then the
            # workers are stopped below); a worker ignores it and is stopped so
            mask = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
            try:
                pid = os.fork()
            except OSError:  # no more processes or memory: go on with the workers there are
                os.close(res_r)
                os.close(res_w)
                signal.pthread_sigmask(signal.SIG_SETMASK, mask)
                break
            if pid == 0:  # the worker
                try:
                    signal.signal(signal.SIGINT, signal.SIG_IGN)
                    signal.pthread_sigmask(signal.SIG_SETMASK, mask)
                    os.close(res_r)
                    os.close(task_w)
                    for fd in children:
                        os.close(fd)
                    _worker(task_r, res_w, rows, chunks, rules, keep_records)
                finally:
                    os._exit(1)  # _worker never returns; nothing else may run here
            children[res_r] = (pid, bytearray())
            signal.pthread_sigmask(signal.SIG_SETMASK, mask)
            os.close(res_w)
        os.close(task_r)
        task_r = None
        if not children:
            os.close(task_w)
            task_w = None
            finished = True
            if not in_process_fallback:
                return [i for chunk in chunks for i in chunk]
            for chunk in chunks:  # reduced here, as with one job
                _put(out, chunk, _reduce_chunk([rows[i] for i in chunk], rules, keep_records),
                     rules, rows)
                bar.update(len(chunk))
            return []
        with selectors.DefaultSelector() as sel:
            for fd in children:
                sel.register(fd, selectors.EVENT_READ)
            sel.register(task_w, selectors.EVENT_WRITE)
            open_children = len(children)
            while open_children:
                for key, _ in sel.select():
                    fd = key.fd
                    if fd == task_w:
                        try:
                            sent = os.write(task_w, pending[:4096])
                        except BlockingIOError:
                            continue
                        pending = pending[sent:]
                        if not pending:
                            sel.unregister(task_w)
                            os.close(task_w)
                            task_w = None
                        continue
                    received = children[fd][1]
                    data = os.read(fd, 1 << 20)
                    if not data:  # the worker ended (normally, or died)
                        sel.unregister(fd)
                        open_children -= 1
                        continue
                    received += data
                    for kind, k, payload in _messages(received):
                        if kind == b"P":  # pickled row by row: a row that cannot be read
                            for i, one in zip(chunks[k], pickle.loads(payload), strict=True):
                                try:  # back costs only itself
                                    out[i] = pickle.loads(one)
                                except Exception as exc:
                                    _put(out, [i], exc, rules, rows)
                        else:
                            try:
                                done = pickle.loads(payload)
                            except Exception as exc:  # results that cannot be read back
                                done = exc
                            _put(out, chunks[k], done, rules, rows)
                        bar.update(len(chunks[k]))
        finished = True
    finally:
        if task_w is not None:
            os.close(task_w)
        if task_r is not None:
            os.close(task_r)
        for fd, (pid, _) in children.items():
            os.close(fd)
            if not finished:  # interrupted: stop the workers
                try:
                    os.kill(pid, signal.SIGTERM)
                except ProcessLookupError:
                    pass
            os.waitpid(pid, 0)
    return [i for chunk in chunks for i in chunk if out[i] is None]


def _widen(fd):
    """A pipe buffer of 1 MiB where Linux allows it (fewer, larger reads of the results)."""
    try:
        import fcntl

        fcntl.fcntl(fd, getattr(fcntl, "F_SETPIPE_SZ", 1031), 1 << 20)
    except (ImportError, OSError):
        pass


def _messages(buffer):
    """Complete messages at the start of buffer (which loses them): (kind, task, payload)."""
    while len(buffer) >= _HEADER:
        size = int.from_bytes(buffer[5:9], "little")
        if len(buffer) < _HEADER + size:
            return
        kind, k = bytes(buffer[:1]), int.from_bytes(buffer[1:5], "little")
        payload = bytes(buffer[_HEADER:_HEADER + size])
        del buffer[:_HEADER + size]
        yield kind, k, payload


def _worker(task_r, res_w, rows, chunks, rules, keep_records):
    """A forked worker's life: tasks from task_r until it is closed, results to res_w."""
    import pickle

    code = 0
    try:
        while True:
            got = os.read(task_r, _TASK)
            if not got:
                break
            k = int.from_bytes(got, "little")
            task = [rows[i] for i in chunks[k]]
            done = _reduce_chunk(task, rules, keep_records)
            try:
                _send(res_w, b"R", k, pickle.dumps(done, protocol=pickle.HIGHEST_PROTOCOL))
            except Exception:  # then row by row: one that cannot be sent costs only its row
                _send(res_w, b"P", k, pickle.dumps([_pickled(one, row, rules) for one, row
                                                    in zip(done, task)]))
    except BaseException:  # interrupted, or the pipe to the parent is gone
        code = 1
    finally:
        os._exit(code)  # no clean-up of the parent's objects, no flushing of its buffers


def _pickled(one, row, rules) -> bytes:
    """A row's (result, record) pickled, or, if it cannot be, its internal error pickled."""
    import pickle

    try:
        return pickle.dumps(one, protocol=pickle.HIGHEST_PROTOCOL)
    except Exception as exc:
        return pickle.dumps((_internal_error(row, rules, "the result cannot be sent back "
                                             f"({type(exc).__name__}: {exc})"), None))


def _picklable(one, row, rules):
    import pickle

    return pickle.loads(_pickled(one, row, rules))


def _send(fd, kind, k, payload):
    view = memoryview(kind + k.to_bytes(4, "little") + len(payload).to_bytes(4, "little") + payload)
    while view:
        view = view[os.write(fd, view):]


class _Progress:
    """A tqdm bar on standard error, or nothing."""

    def __init__(self, total, enabled):
        self._bar = None
        if enabled and total:
            from tqdm import tqdm

            tqdm.monitor_interval = 0  # no monitor thread (worker processes are forked)
            self._bar = tqdm(total=total, unit="row", desc="reducing", file=sys.stderr,
                             leave=False, dynamic_ncols=True)

    def update(self, n):
        if self._bar is not None and n:
            self._bar.update(n)

    def close(self):
        if self._bar is not None:
            self._bar.close()
