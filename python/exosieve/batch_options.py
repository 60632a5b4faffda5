"""The batch engine's options (``BatchOptions`` of the core's ``batch.hpp``): as plain values,
picklable so that a Dask worker rebuilds them, and as the core's object."""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import _core


def _default_chunk(samples: int) -> int:
    # An append costs ~10-20 ms (two fsyncs) whatever its size: chunks of up to 1024 cases
    # spread it thin; 64k runs per chunk bound a chunk's memory with many samples.
    return max(8, min(1024, 65536 // (1 + samples)))


def _engine_options(
    species: list[str],
    times: NDArray[np.float64],
    t_start: float,
    t_end: float,
    *,
    rtol: float = 1e-6,
    max_steps: int = 100_000,
    depletion_fraction: float = 1e-3,
    thresholds: Any = (6.0, 3.0, 2.1),
    samples: int = 0,
    seed: int = 0,
    design: str = "monte_carlo",
) -> dict[str, Any]:
    """The batch engine's options as plain values (picklable, for Dask workers); defaults as
    :func:`compare`'s. The engine reports invalid rows (skip_invalid); whether they stop the run
    is decided before it (``bad_rows``)."""
    return {
        "species": species,
        "times": times,
        "t_start": t_start,
        "t_end": t_end,
        "rtol": rtol,
        "max_steps": max_steps,
        "depletion_fraction": depletion_fraction,
        "thresholds": thresholds,
        "samples": samples,
        "seed": seed,
        "design": design,
        "skip_invalid": True,
    }


def _core_options(options: dict[str, Any], threads: int, chunk_size: int) -> Any:
    kwargs = dict(options)
    kwargs["thresholds"] = _core.RegimeThresholds(*kwargs["thresholds"])
    kwargs["times"] = np.asarray(kwargs["times"], dtype=float)
    # Four chunks in flight: workers go on while the calling thread appends a chunk to the file.
    return _core.BatchOptions(threads=threads, chunk_size=chunk_size, chunks_in_flight=4, **kwargs)
