"""A sweep's chunks as tasks on a Dask cluster (``compare(client=...)``): each task runs one
chunk through the C++ batch engine on one thread; results come back in table order.

``dask.distributed`` (the ``distributed`` extra) is imported only when a client is given.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from . import _core
from .batch_options import _core_options
from .catalogue import CaseTable, given_units, unit_factor
from .progress import Progress


def _run_chunk(payload: dict[str, Any], options: dict[str, Any], threads: int) -> dict[str, Any]:
    """One chunk on a Dask worker: the rows in `payload` through the C++ batch engine."""
    table = _core.CaseTable()
    table.names = payload["names"]
    table.row_labels = payload["row_labels"]
    table.row_errors = payload["row_errors"]
    table.first_key = payload["first_key"]
    for name, values in payload["columns"].items():
        table.add_column(name, values)
    for name, values in payload["text"].items():
        table.add_text(name, values)
    for name, unit in payload.get("units", {}).items():
        table.set_given_unit(name, unit, unit_factor(name, unit))
    rows = len(payload["names"])
    core_options = _core_options(options, threads=threads, chunk_size=max(rows, 1))
    chunks: list[dict[str, Any]] = []
    _core.run_batch(table, 0, rows, core_options, chunks.append, None)
    return chunks[0]


def _payload(table: CaseTable, start: int, stop: int) -> dict[str, Any]:
    rows = slice(start, stop)
    return {
        "names": table.names[rows],
        "row_labels": table.row_labels[rows] if table.row_labels else [],
        "row_errors": table.row_errors[rows] if any(table.row_errors) else [],
        "first_key": start,
        "columns": {k: np.asarray(v, dtype=float)[rows] for k, v in table.columns.items()},
        "text": {k: v[rows] for k, v in table.text_columns.items() if k != "case"},
        "units": given_units(table.units),
    }


def _run_distributed(
    client: Any,
    table: CaseTable,
    begin: int,
    options: dict[str, Any],
    chunk: int,
    threads: int | None,
    append: Callable[[dict[str, Any]], None],
    bar: Progress,
    every: int = 0,
) -> None:
    """Chunks on the workers of `client`, a bounded number in flight; results go to `append` in
    table order as soon as every earlier chunk is in. The progress is updated after each
    chunk written, or after every `every`-th."""
    from distributed import as_completed

    options = dict(options)
    options["times"] = np.asarray(options["times"], dtype=float)
    starts = iter(range(begin, len(table), chunk))
    workers = max(1, len(client.scheduler_info().get("workers", {})))
    window = 2 * workers
    pending = as_completed(loop=client.loop)
    where: dict[str, int] = {}
    finished: dict[int, dict[str, Any]] = {}
    next_row = begin
    written = 0

    def submit() -> bool:
        start = next(starts, None)
        if start is None:
            return False
        stop = min(start + chunk, len(table))
        future = client.submit(
            _run_chunk, _payload(table, start, stop), options, int(threads or 1), pure=False
        )
        where[future.key] = start
        pending.add(future)
        return True

    for _ in range(window):
        if not submit():
            break
    try:
        for future in pending:
            start = where.pop(future.key)
            finished[start] = future.result()
            future.release()
            while next_row in finished:
                block = finished.pop(next_row)
                append(block)
                next_row += len(block["row"])
                written += 1
                if not every or written % every == 0:
                    bar.update(next_row)
            submit()
    except BaseException:
        client.cancel(list(pending.futures))
        raise
