"""Variance-based sensitivity: which uncertain input drives an output, as Sobol' indices.

For independent inputs X_1 .. X_K and an output Y = f(X), the first-order index
``S_i = Var(E[Y | X_i]) / Var(Y)`` is the share of Y's variance that input i causes alone, the
total index ``ST_i = E[Var(Y | X_~i)] / Var(Y)`` its share with every interaction it takes
part in (Sobol' 1993; Homma & Saltelli 1996). ``ST_i - S_i`` is the interaction part; an input
with ``ST_i`` near 0 can be fixed at any value in its range without changing the output's
spread.

They are estimated from a Saltelli design (:func:`saltelli_inputs`): two independent sample
matrices A and B (N rows, K inputs) and, per input i, the matrix A_B^(i) (A with column i
from B), N (K + 2) runs in all. :func:`sobol_indices` takes the outputs of those runs and
computes, in C++, Saltelli et al. (2010, Comput. Phys. Commun. 181, 259) first-order and
Jansen (1999) total indices on outputs centred on their mean (as ``scipy.stats.sobol_indices``
does), with bootstrap percentile intervals: N base rows drawn with replacement, the rows of A,
B and every A_B^(i) kept together, from counter-based streams keyed by (seed, replicate), so
the intervals are the same on any machine and thread count.

:func:`exosieve.compare` runs such a design over a case table's uncertain inputs with
``design="saltelli"``; :meth:`exosieve.Comparison.sensitivity` (:func:`comparison_indices`)
turns its stored runs into a table of indices per case, species and input, and
:func:`exosieve.plot.sensitivity_chart` draws them.

Examples
--------
The Ishigami function (Ishigami & Homma 1990), whose indices are known in closed form:

>>> import numpy as np
>>> from exosieve.sensitivity import saltelli_inputs, sobol_indices
>>> rng = np.random.default_rng(1)
>>> a, b = rng.uniform(-np.pi, np.pi, (2, 4096, 3))
>>> x = saltelli_inputs(a, b)                       # (4096 * 5, 3)
>>> y = np.sin(x[:, 0]) + 7 * np.sin(x[:, 1]) ** 2 + 0.1 * x[:, 2] ** 4 * np.sin(x[:, 0])
>>> r = sobol_indices(y, ["x1", "x2", "x3"], resamples=200)
>>> # closed form (Sobol' & Levitan 1999): S1 = 0.314, 0.442, 0; ST = 0.558, 0.442, 0.244
>>> bool(np.allclose(r.first_order, [0.314, 0.442, 0.0], atol=0.03))
True
>>> bool(np.allclose(r.total, [0.558, 0.442, 0.244], atol=0.03))
True
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from . import _core
from ._arrays import real_number, to_si, whole_number

if TYPE_CHECKING:
    from .batch import Comparison

__all__ = ["SobolIndices", "saltelli_inputs", "sobol_indices", "comparison_indices", "OUTPUTS"]

#: Outputs of a sweep that :func:`comparison_indices` decomposes.
OUTPUTS = ("retained", "fraction")


@dataclass(frozen=True)
class SobolIndices:
    """First-order and total Sobol' indices with bootstrap intervals.

    Arrays have the outputs' leading shape, then one entry per input (the last axis). Entries
    are NaN for an input whose A_B^(i) runs hold no finite output (not uncertain, or every run
    failed), and all of them where fewer than 2 base rows are usable or the output does not
    vary.

    Attributes
    ----------
    inputs : list of str
        Input names, one per entry of the last axis.
    first_order, first_order_low, first_order_high : ndarray
        S_i and the bounds of its interval [1].
    total, total_low, total_high : ndarray
        ST_i and the bounds of its interval [1].
    mean, variance : ndarray
        Mean [output unit] and variance [output unit^2] of the output over A and B.
    rows_used : ndarray of int
        Base rows whose outputs in A, B and the A_B^(i) used are all finite.
    confidence : float
        Two-sided level of the intervals [1].
    """

    inputs: list[str]
    first_order: NDArray[np.float64]
    first_order_low: NDArray[np.float64]
    first_order_high: NDArray[np.float64]
    total: NDArray[np.float64]
    total_low: NDArray[np.float64]
    total_high: NDArray[np.float64]
    mean: NDArray[np.float64]
    variance: NDArray[np.float64]
    rows_used: NDArray[np.int64]
    confidence: float


def saltelli_inputs(a: ArrayLike, b: ArrayLike) -> NDArray[np.float64]:
    """The inputs of every run of a Saltelli design, in the layout :func:`sobol_indices` reads.

    Parameters
    ----------
    a, b : array_like, shape (N, K)
        Two independent samples of the K inputs [their units], one row per draw.

    Returns
    -------
    ndarray, shape (N (K + 2), K)
        The rows of A, then of B, then of A_B^(1), ..., A_B^(K) (A with column i from B).
    """
    a = to_si(a, "a", "1")
    b = to_si(b, "b", "1")
    if a.ndim != 2 or a.shape[0] == 0 or a.shape[1] == 0:
        raise ValueError(f"a must have shape (N, K) with N, K > 0, got {a.shape}")
    if b.shape != a.shape:
        raise ValueError(f"b must have the shape of a, {a.shape}, got {b.shape}")
    k = a.shape[1]
    mixed = np.repeat(a[None], k, axis=0)
    mixed[np.arange(k), :, np.arange(k)] = b.T
    return np.concatenate([a, b, mixed.reshape(-1, k)])


def sobol_indices(
    outputs: ArrayLike,
    inputs: int | Sequence[str],
    *,
    resamples: int = 1000,
    confidence: float = 0.95,
    seed: int = 0,
    threads: int | None = None,
    resolution: float = 0.0,
) -> SobolIndices:
    """Sobol' indices of outputs of a Saltelli design (Saltelli 2010 S_i, Jansen ST_i).

    Parameters
    ----------
    outputs : array_like, shape (..., N (K + 2))
        The outputs of the design's runs in the layout of :func:`saltelli_inputs` (last axis),
        any number of outputs before it [their unit]. NaN marks a failed or skipped run: a base
        row with one in A, B or an A_B^(i) that holds finite outputs is left out.
    inputs : int or sequence of str
        K, or the names of the K inputs.
    resamples : int, optional
        Bootstrap replicates of the intervals (0: none, bounds NaN).
    confidence : float, optional
        Two-sided level of the percentile intervals, in (0, 1) [1].
    seed : int, optional
        Seed of the bootstrap streams.
    threads : int, optional
        Threads over the outputs (default: all cores); results do not depend on it.
    resolution : float, optional
        Spread below which an output counts as constant [output unit]: where its standard
        deviation is not above it the indices are NaN (differences of outputs computed to a
        tolerance would only share out that tolerance's noise).

    Returns
    -------
    SobolIndices
    """
    if isinstance(inputs, (bool, np.bool_)):
        raise ValueError(f"inputs must be a count > 0 or a list of names, got {inputs!r}")
    if isinstance(inputs, (int, np.integer)):
        names = [f"x{i + 1}" for i in range(whole_number(inputs, "inputs", 1))]
    elif isinstance(inputs, str):
        raise ValueError(f"inputs must be a count > 0 or a list of names, got {inputs!r}")
    else:
        names = [str(name) for name in inputs]
        if not names:
            raise ValueError("inputs must name at least one input, got none")
    resamples = whole_number(resamples, "resamples", 0)
    confidence = real_number(confidence, "confidence", "1")
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must be in (0, 1), got {confidence}")
    seed = whole_number(seed, "seed", 0)
    threads = 0 if threads is None else whole_number(threads, "threads", 1)
    resolution = real_number(resolution, "resolution", "output unit")
    if resolution < 0.0:
        raise ValueError(f"resolution must be >= 0 [output unit], got {resolution}")
    y = to_si(outputs, "outputs", "1")
    k = len(names)
    if y.ndim == 0 or y.shape[-1] == 0 or y.shape[-1] % (k + 2):
        raise ValueError(
            f"outputs must have a last axis of N (K + 2) runs for K = {k} inputs, got shape "
            f"{y.shape}"
        )
    base = y.shape[-1] // (k + 2)
    lead = y.shape[:-1]
    raw = _core.sobol_indices(
        np.ascontiguousarray(y.reshape(-1, y.shape[-1])),
        base,
        k,
        resamples=resamples,
        confidence=confidence,
        seed=seed,
        threads=threads,
        resolution=resolution,
    )

    def shaped(name: str, trailing: tuple[int, ...]) -> Any:
        return np.asarray(raw[name]).reshape(lead + trailing)

    return SobolIndices(
        inputs=names,
        first_order=shaped("first_order", (k,)),
        first_order_low=shaped("first_order_low", (k,)),
        first_order_high=shaped("first_order_high", (k,)),
        total=shaped("total", (k,)),
        total_low=shaped("total_low", (k,)),
        total_high=shaped("total_high", (k,)),
        mean=shaped("mean", ()),
        variance=shaped("variance", ()),
        rows_used=shaped("rows_used", ()),
        confidence=confidence,
    )


def comparison_indices(
    comparison: Comparison,
    output: str = "retained",
    *,
    retain: float | None = None,
    resamples: int = 1000,
    confidence: float = 0.95,
    seed: int = 0,
    threads: int | None = None,
) -> Any:
    """Sobol' indices per case, species and uncertain input of a Saltelli sweep.

    Parameters
    ----------
    comparison : Comparison
        From :func:`exosieve.compare` with ``design="saltelli"`` (or its result file).
    output : {"retained", "fraction"}, optional
        ``"retained"`` (default): the retention indicator, 1 where more than ``retain`` of the
        species' inventory is left at the end, else 0. Its mean is the retention probability,
        so the indices say which input's uncertainty decides whether the species is kept.
        ``"fraction"``: the retained fraction N(end) / N(start) itself [1], whose variance
        is dominated by the runs that keep most of the species; a spread below the run's
        ``rtol`` is integration noise and gives NaN indices.
    retain : float, optional
        Threshold of ``"retained"`` [1]; default: the run's ``retain``.
    resamples, confidence, seed, threads
        As :func:`sobol_indices`.

    Returns
    -------
    pandas.DataFrame
        One row per case, species present and input: ``case``, ``row``, ``species``,
        ``input``, ``unit`` (the input's SI unit), ``uncertain`` (bool: the case draws the
        input), ``first_order``, ``first_order_low``, ``first_order_high``, ``total``,
        ``total_low``, ``total_high`` [1], ``output_mean`` (the retention probability for
        ``"retained"``) and ``output_sd`` [output unit], ``rows_used``. Indices are NaN for an
        input the case holds fixed and where the output does not vary over the samples (a
        species kept, or lost, in every run). ``frame.attrs`` holds ``output``, ``retain``,
        ``confidence`` and ``resamples``.
    """
    import pandas as pd

    from .batch import _retain

    if comparison.design != "saltelli":
        raise ValueError(
            "sensitivity indices need a sweep run with design='saltelli' "
            f"(this one: design={comparison.design!r}, samples={comparison.samples})"
        )
    if output not in OUTPUTS:
        raise ValueError(f"output must be one of {', '.join(OUTPUTS)}, got {output!r}")
    summary = comparison.config.get("summary", {})
    threshold = _retain(summary.get("retain", 0.5) if retain is None else retain)
    inputs = comparison.inputs
    k, s = len(inputs), len(comparison.species)
    draws = np.asarray(comparison["sample_retained_fraction"], dtype=float)  # (case, run, sp)
    if output == "retained":
        y = np.where(np.isfinite(draws), (draws > threshold).astype(float), np.nan)
    else:
        y = draws
    present = np.asarray(comparison["mole_fraction"], dtype=float) > 0.0  # (case, species)
    ci, si = np.nonzero(present)
    values = np.ascontiguousarray(np.transpose(y, (0, 2, 1))[ci, si])  # (rows, runs)
    options = comparison.config.get("options", {})
    noise = float(options.get("rtol", 0.0)) if output == "fraction" else 0.0
    result = sobol_indices(
        values,
        inputs,
        resamples=resamples,
        confidence=confidence,
        seed=seed,
        threads=threads,
        resolution=noise,
    )
    uncertain = np.asarray(comparison["input_uncertain"])[ci] == 1  # (rows, K)
    units = np.array(comparison.input_units, dtype=object)
    rows = len(ci)
    frame = pd.DataFrame(
        {
            "case": np.repeat(np.asarray(comparison["case"], dtype=object)[ci], k),
            "row": np.repeat(np.asarray(comparison["row"])[ci], k),
            "species": np.repeat(np.array(comparison.species, dtype=object)[si], k)
            if s
            else np.array([], dtype=object),
            "input": np.tile(np.array(inputs, dtype=object), rows),
            "unit": np.tile(units, rows),
            "uncertain": uncertain.ravel(),
            "first_order": result.first_order.ravel(),
            "first_order_low": result.first_order_low.ravel(),
            "first_order_high": result.first_order_high.ravel(),
            "total": result.total.ravel(),
            "total_low": result.total_low.ravel(),
            "total_high": result.total_high.ravel(),
            "output_mean": np.repeat(result.mean, k),
            "output_sd": np.repeat(np.sqrt(result.variance), k),
            "rows_used": np.repeat(result.rows_used, k),
        }
    )
    frame.attrs.update(
        {
            "output": output,
            "retain": threshold,
            "confidence": result.confidence,
            "resamples": int(resamples),
        }
    )
    return frame
