"""Comparing planet cases: many evolution runs in parallel, with Monte Carlo over the stated
uncertainties, summarised per case and species, streamed to HDF5.

:func:`compare` reads a case table (a CSV file or a pandas DataFrame, see
:mod:`exosieve.catalogue` and the README), runs one evolution per case (and ``samples`` more per
case with parameters drawn from their uncertainties) on the compiled batch engine, and returns a
:class:`Comparison`. Its ``summary`` is a pandas DataFrame with one row per case and species.

The engine runs cases on a pool of C++ threads without the GIL and hands results back chunk by
chunk in table order; with ``output=`` each chunk is appended to an HDF5 file as it finishes, so
memory stays flat in the number of cases and an interrupted sweep resumes where it stopped. With
``client=`` (a ``dask.distributed.Client``) chunks run on the cluster's workers instead. Monte
Carlo draws depend only on (seed, row, sample), so results are the same for any number of
threads or workers.

Result files: see :mod:`exosieve.sweep_file`.

Examples
--------
>>> import pandas as pd
>>> from exosieve import compare
>>> cases = pd.DataFrame({
...     "case": ["warm", "hot"],
...     "planet_mass [M_earth]": [1.0, 1.0],
...     "planet_radius [R_earth]": [1.0, 1.0],
...     "exobase_altitude [km]": [500.0, 500.0],
...     "exobase_density [m-3]": [1e13, 1e13],
...     "exobase_temperature [K]": [900.0, 1500.0],
...     "inventory [particles]": [1e37, 1e37],
...     "x_N2": [0.75, 0.75], "x_He": [0.25, 0.25],
...     "exobase_composition": ["bulk", "bulk"]})
>>> result = compare(cases, t_end=4.5e9 * 3.15576e7, threads=1)
>>> table = result.summary.set_index(["case", "species"])
>>> bool(table.loc[("warm", "He"), "retained"]), bool(table.loc[("hot", "He"), "retained"])
(True, False)
>>> round(float(table.loc[("hot", "N2"), "final_retained_fraction"]), 12)
1.0
"""

from __future__ import annotations

import json
import math
import os
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import _core
from . import constants as c
from ._arrays import real_number, to_si, whole_number
from .batch_options import _core_options, _default_chunk, _engine_options
from .catalogue import CaseTable, load_cases, width_column
from .distributed import _run_distributed
from .hydrodynamic import REGIMES, as_thresholds
from .progress import Progress
from .sweep_file import (
    _COORDINATES,
    _FLAGS,
    _INPUT_VARIABLES,
    _SAMPLE_VARIABLES,
    _UNITS,
    _VARIABLES,
    _create_file,
    _FileSink,
    _read_variable,
    _require_layout,
    _variable_specs,
    input_units,
    sample_runs,
)

__all__ = ["compare", "Comparison", "open_comparison", "Interrupted"]

DESIGNS = ("monte_carlo", "saltelli")


class Interrupted(KeyboardInterrupt):
    """Ctrl-C (or a signal) stopped :func:`compare`; ``result`` holds the finished cases."""

    def __init__(self, result: Comparison) -> None:
        super().__init__(f"interrupted after {len(result)} of {result.total_cases} cases")
        self.result = result


class Comparison:
    """Results of :func:`compare`, in memory or backed by a result file.

    Arrays are indexed ``[case, ...]`` in table order; see ``variables`` for names, units and
    dimensions. Species a case does not have are NaN.

    Attributes
    ----------
    species : list of str
        Species of the ``species`` dimension.
    times : ndarray
        Output stellar ages [s].
    samples : int
        Sample runs per case (the length of the ``sample`` dimension): ``samples`` of
        :func:`compare`, times (inputs + 2) for a Saltelli design.
    inputs : list of str
        Uncertain inputs of the table (the ``input`` dimension), in column order.
    design : str
        ``"monte_carlo"`` or ``"saltelli"`` (see :func:`compare`).
    config : dict
        The table's fingerprint and every option of the run.
    path : Path or None
        The result file, if the comparison lives in one.
    """

    def __init__(
        self,
        data: dict[str, NDArray[Any]] | None,
        species: list[str],
        times: NDArray[np.float64],
        samples: int,
        config: dict[str, Any],
        path: Path | None = None,
        rows: int | None = None,
    ) -> None:
        self._data: dict[str, NDArray[Any]] = dict(data or {})
        self.species = list(species)
        self.times = np.asarray(times, dtype=float)
        self.samples = int(samples)
        self.config = config
        self.path = path
        self._rows = rows
        self._summary: Any = None
        #: Cases that were already in ``output`` when :func:`compare` started (0: a new run).
        self.resumed_from = 0
        options = config.get("options", {})
        #: Uncertain inputs of the table (parameters with a ``_sigma``/``_lnsigma`` column).
        self.inputs: list[str] = [str(name) for name in options.get("inputs", [])]
        #: How the samples were drawn: ``"monte_carlo"`` or ``"saltelli"``.
        self.design: str = str(options.get("design", "monte_carlo"))

    # --- arrays ---------------------------------------------------------------------------
    @property
    def variables(self) -> dict[str, tuple[list[str], str, str]]:
        """Name -> (dimensions, units, long name) of every per-case array."""
        spec = _variable_specs(self.samples, len(self.inputs))
        return {name: (["case", *dims], units, text) for name, _, dims, units, text in spec}

    @property
    def input_units(self) -> list[str]:
        """SI unit of each uncertain input, as in ``inputs``."""
        return input_units(self.inputs)

    def sensitivity(
        self,
        output: str = "retained",
        *,
        retain: float | None = None,
        resamples: int = 1000,
        confidence: float = 0.95,
        seed: int = 0,
        threads: int | None = None,
    ) -> Any:
        """Sobol' indices per case, species and uncertain input (needs ``design="saltelli"``).

        See :func:`exosieve.sensitivity.comparison_indices` for the parameters and the table.
        """
        from .sensitivity import comparison_indices

        return comparison_indices(
            self,
            output,
            retain=retain,
            resamples=resamples,
            confidence=confidence,
            seed=seed,
            threads=threads,
        )

    def __getitem__(self, name: str) -> NDArray[Any]:
        if name in ("case", "row"):
            return self._load(name)
        if name not in self.variables:
            raise ValueError(f"no variable '{name}' (have {', '.join(self.variables)})")
        return self._load(name)

    def _load(self, name: str) -> NDArray[Any]:
        if name not in self._data:
            if self.path is None:
                raise ValueError(f"no variable '{name}'")
            self._data[name] = _read_variable(self.path, name, len(self))
        return self._data[name]

    def __len__(self) -> int:
        if self._rows is not None:
            return self._rows
        return len(self._data["row"])

    @property
    def cases(self) -> list[str]:
        """Case names (the ``case`` coordinate), in table order."""
        return [str(x) for x in self["case"]]

    @property
    def total_cases(self) -> int:
        """Rows of the case table the run was asked to compute."""
        return int(self.config["table"]["rows"])

    @property
    def complete(self) -> bool:
        """True when every row of the table has its results."""
        return len(self) == self.total_cases

    @property
    def errors(self) -> Any:
        """pandas DataFrame of the cases whose row was invalid or whose nominal run failed, and
        of cases with failed Monte Carlo samples (columns: case, row, error, samples_failed,
        sample_error)."""
        import pandas as pd

        error = np.asarray(self["error"], dtype=object)
        failed = (
            self["sample_failed"].sum(axis=1)
            if self.samples
            else np.zeros(len(self), dtype=np.int64)
        )
        sample_error = (
            np.asarray(self["sample_error"], dtype=object)
            if self.samples
            else np.full(len(self), "", dtype=object)
        )
        keep = (error != "") | (failed > 0)
        return pd.DataFrame(
            {
                "case": np.asarray(self["case"], dtype=object)[keep],
                "row": self["row"][keep],
                "error": error[keep],
                "samples_failed": failed[keep],
                "sample_error": sample_error[keep],
            }
        ).reset_index(drop=True)

    # --- summary ----------------------------------------------------------------------------
    @property
    def summary(self) -> Any:
        """One row per case and species (see :meth:`summarize`), with the run's ``retain`` and
        ``percentiles``."""
        if self._summary is None:
            self._summary = self.summarize()
        return self._summary

    def summarize(
        self, retain: float | None = None, percentiles: Sequence[float] | None = None
    ) -> Any:
        """Summary table: one row per case and species present (and one row, species empty,
        for an invalid row).

        Parameters
        ----------
        retain : float, optional
            A species counts as retained when more than this fraction of its inventory is left
            at the end [1]; default: the run's ``retain``.
        percentiles : sequence of float, optional
            Percentiles of the retained fraction over the Monte Carlo samples [%]; default: the
            run's.

        Returns
        -------
        pandas.DataFrame
            Columns ``case``, ``row``, ``species``, ``final_retained_fraction`` [1],
            ``retained`` (bool), ``depletion_time`` [s] (NaN: never), ``efolding_time`` [s]
            (N/Q at the start, Q the thermal rate), ``escape_rate_start`` (Q) and
            ``given_loss_rate_start`` (the given loss, 0: none) [s-1] at the start,
            ``jeans_parameter_start`` and ``jeans_parameter_end`` [1],
            ``regime_start`` (name), ``hydrodynamic_unmodelled`` (bool: the case has no heating
            efficiency and its bulk gas is hydrodynamic at some time, at the start or later in
            the run, so its Jeans-based retained fractions do not describe its loss),
            ``non_jeans_loss_share`` [1] (share of the species' loss taken outside the Jeans
            picture), ``error``; with
            samples also ``probability_retained``
            (share of successful samples with more than ``retain`` left) [1],
            ``retained_fraction_p<q>`` [1] and ``samples_ok``. ``frame.attrs["units"]`` gives
            the unit of each numeric column.
        """
        import pandas as pd

        summary = self.config.get("summary", {})
        retain = _retain(summary.get("retain", 0.5) if retain is None else retain)
        q = list(summary.get("percentiles", [5, 50, 95]) if percentiles is None else percentiles)
        for value in q:
            if not 0.0 <= float(value) <= 100.0:
                raise ValueError(f"percentiles must be in [0, 100], got {value}")
        n, s = len(self), len(self.species)
        x = self["mole_fraction"]
        present = x > 0.0
        unknown = ~np.isfinite(x).any(axis=1) if s else np.ones(n, dtype=bool)
        ci, si = np.nonzero(present)
        extra = np.nonzero(unknown)[0]
        case_index = np.concatenate([ci, extra])
        species_index = np.concatenate([si, np.full(len(extra), -1)])
        order = np.lexsort((species_index, case_index))
        ci, si = case_index[order], species_index[order]
        valid = si >= 0
        sj = np.where(valid, si, 0)

        def pick(name: str) -> NDArray[Any]:
            values = self[name]
            out = values[ci, sj] if s else np.full(len(ci), np.nan)
            return np.where(valid, out, np.nan) if out.dtype.kind == "f" else out

        final = pick("final_retained_fraction")
        regime = self["regime_start"][ci, sj] if s else np.full(len(ci), -1)
        names = np.array(["", *REGIMES], dtype=object)
        columns: dict[str, Any] = {
            "case": np.asarray(self["case"], dtype=object)[ci],
            "row": self["row"][ci],
            "species": np.where(valid, np.array(self.species + [""], dtype=object)[si], ""),
            "final_retained_fraction": final,
            "retained": final > retain,
            "depletion_time": pick("depletion_time"),
            "efolding_time": pick("efolding_time"),
            "escape_rate_start": pick("escape_rate_start"),
            "given_loss_rate_start": pick("given_loss_rate_start"),
            "jeans_parameter_start": pick("jeans_parameter_start"),
            "jeans_parameter_end": pick("jeans_parameter_end"),
            "regime_start": names[np.where(valid, regime, -1) + 1],
            "hydrodynamic_unmodelled": self["hydrodynamic_unmodelled"][ci] == 1,
            "non_jeans_loss_share": pick("non_jeans_loss_share"),
            "error": np.asarray(self["error"], dtype=object)[ci],
        }
        units = {name: _UNITS[name] for name in columns if name in _UNITS}
        if self.samples:
            draws = self["sample_retained_fraction"][ci, :, sj]  # (rows, samples)
            ok = np.isfinite(draws) & valid[:, None]
            count = ok.sum(axis=1)
            hits = ((draws > retain) & ok).sum(axis=1)
            with np.errstate(invalid="ignore", divide="ignore"):
                columns["probability_retained"] = np.where(count > 0, hits / count, np.nan)
            units["probability_retained"] = "1"
            for value in q:
                label = f"retained_fraction_p{float(value):g}"
                columns[label] = _nanpercentile_rows(draws, ok, float(value))
                units[label] = "1"
            columns["samples_ok"] = count
        frame = pd.DataFrame(columns)
        frame.attrs["units"] = units
        frame.attrs["retain"] = retain
        return frame

    # --- files ------------------------------------------------------------------------------
    def to_hdf5(self, path: str | os.PathLike[str]) -> Path:
        """Write the comparison to ``path`` (replaced atomically) in the layout of
        :func:`compare`'s ``output`` files; returns the path."""
        path = Path(path)
        out = _create_file(path, self.config, self.species, self.times, self.samples, self.inputs)
        try:
            if len(self):
                names = ["case", "row", *self.variables]
                out.append({name: self[name] for name in names})
        finally:
            out.close()
        return path

    def to_xarray(self) -> Any:
        """The comparison as an ``xarray.Dataset`` laid out as its result file opens in xarray:
        dimensions ``case`` (coordinate: the case names, so ``.sel(case="name")`` picks a
        case), ``species``, ``time`` [s], ``sample`` and ``input`` (the uncertain inputs);
        ``units`` and ``long_name`` on every variable, ``flag_values``/``flag_meanings`` on
        ``regime_start``; the attributes
        ``Conventions``, ``exosieve_version`` and ``config`` (JSON)."""
        import xarray as xr

        def described(name: str) -> dict[str, Any]:
            units, long_name = _COORDINATES[name]
            return {"units": units, "long_name": long_name}

        labels = {
            "case": np.asarray(self["case"], dtype=object),
            "species": np.array(self.species, dtype=object),
            "time": self.times,
        }
        if self.samples:
            labels["sample"] = np.arange(self.samples, dtype=np.int64)
            if self.inputs:
                labels["input"] = np.array(self.inputs, dtype=object)
        coords = {name: (name, v, described(name)) for name, v in labels.items()}
        data: dict[str, Any] = {"row": ("case", self["row"], described("row"))}
        if self.samples and self.inputs:
            units, long_name = _COORDINATES["input_unit"]
            data["input_unit"] = (
                "input",
                np.array(self.input_units, dtype=object),
                {"units": units, "long_name": long_name},
            )
        for name, (dims, units, long_name) in self.variables.items():
            attrs: dict[str, Any] = {"units": units, "long_name": long_name}
            if name in _FLAGS:
                values, meanings = _FLAGS[name]
                attrs.update(flag_values=np.array(values, np.int64), flag_meanings=meanings)
            data[name] = (dims, self[name], attrs)
        return xr.Dataset(
            data,
            coords=coords,
            attrs={
                "Conventions": _core.RESULT_FILE_CONVENTIONS,
                "exosieve_version": str(self.config.get("version", _core.__version__)),
                "config": json.dumps(self.config, sort_keys=True),
            },
        )

    def __repr__(self) -> str:
        where = f", path={str(self.path)!r}" if self.path else ""
        return (
            f"Comparison({len(self)} of {self.total_cases} cases, species={self.species}, "
            f"samples={self.samples}{where})"
        )


def _nanpercentile_rows(
    draws: NDArray[np.float64], ok: NDArray[np.bool_], q: float
) -> NDArray[np.float64]:
    """Percentile ``q`` of each row over its `ok` entries (NaN for a row with none)."""
    values = np.where(ok, draws, np.nan)
    out = np.full(values.shape[0], np.nan)
    rows = ok.any(axis=1)
    if rows.any():
        out[rows] = np.nanpercentile(values[rows], q, axis=1)
    return out


def _retain(value: Any) -> float:
    """The ``retain`` threshold, a number in [0, 1) (ValueError naming it otherwise)."""
    retain = real_number(value, "retain", "1")
    if not 0.0 <= retain < 1.0:
        raise ValueError(f"retain must be in [0, 1), got {retain}")
    return retain


def open_comparison(path: str | os.PathLike[str]) -> Comparison:
    """Open a result file written by :func:`compare` or :meth:`Comparison.to_hdf5`.

    Only the rows recorded as complete are read (a sweep still running, or interrupted, has
    fewer rows than its table). Arrays are read when first used.
    """
    from .hdf5_io import read_attribute, read_doubles, read_int64s, read_int_attribute, read_strings

    path = Path(path)
    try:
        config = json.loads(read_attribute(path, "", "config"))
    except json.JSONDecodeError:
        config = {}
    if config.get("kind") != "exosieve.compare":
        raise ValueError(f"{path} is not a comparison file written by exosieve.compare")
    _require_layout(path)
    rows = int(read_int_attribute(path, "", "completed"))
    species = [str(name) for name in read_strings(path, "species")]
    times = np.asarray(read_doubles(path, "time"))
    samples = sample_runs(config["options"])
    if samples:
        assert len(read_int64s(path, "sample")) == samples
    return Comparison(None, species, times, samples, config, path=path, rows=rows)


def table_inputs(columns: Sequence[str]) -> list[str]:
    """Uncertain inputs of a table with these numeric columns: the parameters with a
    ``_sigma``, ``_lnsigma`` or ``_sigma_upper``/``_sigma_lower`` column, in the order of their
    first such column (as the batch engine lists them; a split normal's pair is one input)."""
    out: list[str] = []
    for name in columns:
        kind, base = width_column(name)
        if kind is not None and base not in out:
            out.append(base)
    return out


def _spans(table: CaseTable, t_start: float, t_end: float) -> tuple[float, float]:
    """Earliest start and latest end age [s] over the table's rows."""
    n = len(table)

    def column(name: str) -> NDArray[np.float64]:
        return np.asarray(table.columns.get(name, [np.nan] * n), dtype=float)

    start = np.where(np.isnan(column("age_start")), t_start, column("age_start"))
    end = column("age_end")
    end = np.where(np.isnan(end), column("star_age"), end)
    end = np.where(np.isnan(end), t_end, end)
    if n == 0:
        return t_start, t_end
    return float(np.nanmin(start)), float(np.nanmax(end))


def _output_times(times: int | Any, table: CaseTable, t_start: float, t_end: float) -> Any:
    if isinstance(times, (int, np.integer)) and not isinstance(times, bool):
        if times < 2:
            raise ValueError(f"times must be a count >= 2 or an array of ages [s], got {times}")
        lo, hi = _spans(table, t_start, t_end)
        if not (math.isfinite(lo) and math.isfinite(hi) and hi > lo):
            raise ValueError(
                f"cannot place output times between ages {lo} s and {hi} s; give t_start, t_end"
            )
        grid = np.geomspace(lo, hi, times) if lo > 0 else np.linspace(lo, hi, times)
        grid[0], grid[-1] = lo, hi
        return grid
    expected = "a count >= 2 or a 1-D array of at least one output age [s] within the ages run"
    if isinstance(times, (str, bytes, bool, np.bool_)) or np.ndim(times) == 0:
        raise ValueError(f"times must be {expected}, got {times!r}")
    try:
        grid = to_si(times, "times", "s")
    except ValueError as err:
        raise ValueError(f"times must be {expected}, got {times!r}") from err
    if grid.ndim != 1 or grid.size == 0:
        raise ValueError(f"times must be {expected}, got shape {grid.shape}")
    bad = np.flatnonzero(~np.isfinite(grid))
    if bad.size:
        raise ValueError(f"times must be finite, got {grid[bad[0]]} (element {bad[0]})")
    lo, hi = _spans(table, t_start, t_end)
    outside = np.flatnonzero((grid < lo * (1 - 1e-12)) | (grid > hi * (1 + 1e-12)))
    if outside.size and math.isfinite(lo) and math.isfinite(hi):
        k = int(outside[0])
        raise ValueError(
            f"times must lie within the ages run, {lo:g} s to {hi:g} s, got {grid[k]:g} s "
            f"(element {k})"
        )
    return np.ascontiguousarray(grid)


class _MemorySink:
    def __init__(self) -> None:
        self.chunks: list[dict[str, Any]] = []
        self.completed = 0

    def append(self, chunk: dict[str, Any]) -> None:
        self.chunks.append(chunk)
        self.completed += len(chunk["row"])

    @property
    def target(self) -> Any:
        """What the batch engine hands its chunks to."""
        return self.append

    def close(self) -> None:
        pass

    def result(
        self, species: list[str], times: Any, samples: int, config: dict[str, Any]
    ) -> Comparison:
        inputs = len(config["options"].get("inputs", []))
        names = ["case", "row"] + [v[0] for v in _variable_specs(samples, inputs)]
        data: dict[str, Any] = {}
        for name in names:
            parts = [chunk[name] for chunk in self.chunks]
            if parts:
                data[name] = np.concatenate(parts)
            else:
                data[name] = _empty(name, len(species), len(times), samples, inputs)
        return Comparison(data, species, times, samples, config)


def _empty(name: str, s: int, t: int, n: int, k: int = 0) -> NDArray[Any]:
    if name in ("case", "row"):
        return np.zeros(0, dtype=object if name == "case" else np.int64)
    for variable, dtype, dims, *_ in _VARIABLES + _SAMPLE_VARIABLES + _INPUT_VARIABLES:
        if variable == name:
            shape = (0, *[{"species": s, "time": t, "sample": n, "input": k}[d] for d in dims])
            kind = {str: object, int: np.int64, float: float}[dtype]
            return np.zeros(shape, dtype=kind)
    raise ValueError(name)


def compare(
    cases: Any,
    *,
    t_start: float = 10.0 * c.MYR,
    t_end: float = 4.5 * c.GYR,
    times: int | Sequence[float] | NDArray[np.float64] = 16,
    samples: int = 0,
    seed: int = 0,
    design: str = "monte_carlo",
    retain: float = 0.5,
    percentiles: Sequence[float] = (5.0, 50.0, 95.0),
    depletion_fraction: float = 1e-3,
    thresholds: Any = (6.0, 3.0, 2.1),
    rtol: float = 1e-6,
    max_steps: int = 100_000,
    bad_rows: str = "raise",
    threads: int | None = None,
    chunk_size: int | None = None,
    output: str | os.PathLike[str] | None = None,
    overwrite: bool = False,
    client: Any = None,
    progress: bool | Callable[[int, int], Any] = False,
    progress_every: int | None = None,
) -> Comparison:
    """Evolve every case of a case table, with Monte Carlo over its uncertainties.

    Parameters
    ----------
    cases : str, Path, pandas.DataFrame, astropy Table/QTable or CaseTable
        The case table (a CSV path or a frame with ``quantity [unit]`` headers, or a Table
        whose columns carry their units; see the README).
    t_start : float, optional
        Stellar age at the start [s] for rows without ``age_start``. Default 10 Myr.
    t_end : float, optional
        Stellar age at the end [s] for rows without ``age_end`` or ``star_age``. Default 4.5 Gyr.
    times : int or array of float, optional
        Output stellar ages [s], or their number, log-spaced from the earliest start to the
        latest end. Default 16.
    samples : int, optional
        Monte Carlo samples per case (0: nominal runs only).
    seed : int, optional
        Seed of the Monte Carlo draws; sample ``j`` of row ``k`` depends only on (seed, k, j).
    design : {"monte_carlo", "saltelli"}, optional
        ``"monte_carlo"``: ``samples`` independent draws per case. ``"saltelli"``: the Saltelli
        design for Sobol' sensitivity indices over the table's K uncertain inputs (its
        ``_sigma``/``_lnsigma`` columns), with ``samples`` = N base rows: N (K + 2) runs per
        case, laid out as the rows of A, of B and of each A_B^(i) (A with input i from B; row r
        of A is draw 2r, of B draw 2r + 1). Every run is a draw from the input distribution,
        so the summary's probabilities and percentiles stay valid; the A_B^(i) runs of a case
        that holds input i fixed would repeat A's and are not run (NaN). See
        :meth:`Comparison.sensitivity`. Either way every sample's drawn inputs are stored as
        ``sample_input`` [case, sample, input] next to its outputs.
    retain : float, optional
        Summary threshold: a species is retained when more than this fraction of its inventory
        is left at the end [1]. Default 0.5.
    percentiles : sequence of float, optional
        Percentiles of the sampled retained fractions in the summary [%].
    depletion_fraction : float, optional
        A species is depleted below this fraction of its start inventory [1]. Default 1e-3.
    thresholds : RegimeThresholds or (float, float, float), optional
        Jeans-parameter thresholds (enhanced, transition, hydrodynamic) [1], as for
        :func:`evolve`; default (6, 3, 2.1) from Volkov et al. (2011).
    rtol : float, optional
        Relative tolerance of each run for rows without an ``rtol`` column [1]. Default 1e-6.
    max_steps : int, optional
        Step budget of each run for rows without a ``max_steps`` column.
    bad_rows : {"raise", "report"}, optional
        ``"raise"``: a malformed or invalid row stops everything before any run, with the row and
        column named. ``"report"``: such rows get their error in the results and the others run.
    threads : int, optional
        Threads of the batch engine (default: all cores; on a Dask worker: 1 per task).
    chunk_size : int, optional
        Cases per chunk (results stream out a chunk at a time; a Dask task is one chunk).
    output : str or PathLike, optional
        Stream results into this HDF5 file. If it already holds a sweep of the same table and
        options, the run resumes after its finished chunks; a different sweep is refused unless
        ``overwrite``.
    overwrite : bool, optional
        Replace an existing ``output`` instead of resuming it.
    client : dask.distributed.Client, optional
        Run the chunks on this cluster's workers; results stream back in table order.
    progress : bool or callable, optional
        True: a progress bar (tqdm) with rate and time left; a callable is called
        as ``progress(cases_done, cases_total)``. Updates come about every 0.1 s (or as
        ``progress_every`` says), and at the end.
    progress_every : int, optional
        Update the progress after every this many finished chunks [chunks] (with the cases of
        the chunks kept so far) instead of about every 0.1 s: a schedule set by counts alone,
        the same on any machine and number of threads. Ctrl-C is then noticed at those
        updates, so that an interrupted run keeps a whole number of such steps.

    Returns
    -------
    Comparison
        With ``.summary`` (pandas DataFrame) and ``.to_hdf5(path)``; file-backed when
        ``output`` is given.

    Raises
    ------
    ValueError
        For a malformed table (naming the row and the column) or bad options, before any run.
    Interrupted
        (a KeyboardInterrupt) on Ctrl-C; its ``result`` holds the finished cases, which are also
        in ``output``.
    """
    if bad_rows not in ("raise", "report"):
        raise ValueError(f"bad_rows must be 'raise' or 'report', got {bad_rows!r}")
    samples = whole_number(samples, "samples", 0)
    seed = whole_number(seed, "seed", 0)
    if not isinstance(design, str) or design not in DESIGNS:
        raise ValueError(f"design must be 'monte_carlo' or 'saltelli', got {design!r}")
    max_steps = whole_number(max_steps, "max_steps", 0)
    retain = _retain(retain)
    t_start = real_number(t_start, "t_start", "s")
    t_end = real_number(t_end, "t_end", "s")
    rtol = real_number(rtol, "rtol", "1")
    depletion_fraction = real_number(depletion_fraction, "depletion_fraction", "1")
    if threads is not None:
        threads = whole_number(threads, "threads", 1)
    if chunk_size is not None:
        chunk_size = whole_number(chunk_size, "chunk_size", 1, " [cases]")
    if progress_every is not None:
        progress_every = whole_number(progress_every, "progress_every", 1, " [chunks]")
    every = int(progress_every or 0)
    if not isinstance(progress, bool) and not callable(progress):
        raise ValueError(
            f"progress must be True, False or a callable progress(done, total), got {progress!r}"
        )
    try:
        if any(isinstance(v, (bool, np.bool_)) for v in percentiles):
            raise TypeError("a bool is not a percentile")
        q = [float(v) for v in percentiles]
    except (TypeError, ValueError) as err:
        raise ValueError(f"percentiles must be numbers in [0, 100], got {percentiles!r}") from err
    if isinstance(percentiles, (str, bytes)) or not q or not all(0.0 <= v <= 100.0 for v in q):
        raise ValueError(f"percentiles must be numbers in [0, 100], got {percentiles!r}")
    table = load_cases(cases, errors="collect" if bad_rows == "report" else "raise")
    species = list(table.species)
    inputs = table_inputs(list(table.columns))
    if design == "saltelli" and not inputs:
        raise ValueError(
            "design='saltelli' needs uncertain inputs: the case table has no '_sigma', "
            "'_lnsigma' or '_sigma_upper' column"
        )
    if design == "saltelli" and samples == 0:
        raise ValueError("design='saltelli' needs samples > 0 (base rows N), got 0")
    runs = sample_runs({"samples": samples, "design": design, "inputs": inputs})
    grid = _output_times(times, table, float(t_start), float(t_end))
    chunk = int(chunk_size or _default_chunk(runs))
    limits = as_thresholds(thresholds)
    options = _engine_options(
        species,
        grid,
        float(t_start),
        float(t_end),
        rtol=float(rtol),
        max_steps=int(max_steps),
        depletion_fraction=float(depletion_fraction),
        thresholds=(limits.enhanced, limits.transition, limits.hydrodynamic),
        samples=int(samples),
        seed=int(seed),
        design=design,
    )
    config = {
        "kind": "exosieve.compare",
        "version": _core.__version__,
        "table": {
            "source": table.source,
            "rows": len(table),
            "sha256": table.fingerprint(),
            "columns": sorted(table.columns) + sorted(table.text_columns),
        },
        "options": {
            "species": species,
            "times_s": [float(t) for t in grid],
            "t_start_s": float(t_start),
            "t_end_s": float(t_end),
            "rtol": float(rtol),
            "max_steps": int(max_steps),
            "depletion_fraction": float(depletion_fraction),
            "regime_thresholds": {
                "enhanced": limits.enhanced,
                "transition": limits.transition,
                "hydrodynamic": limits.hydrodynamic,
            },
            "samples": int(samples),
            "seed": int(seed),
            "design": design,
            "inputs": inputs,
            "bad_rows": bad_rows,
            "distributions": "normal (_sigma, truncated to the allowed range) or log-normal "
            "(_lnsigma, median = value); draws from SplitMix64 streams keyed by (seed, row, "
            "sample)"
            + (
                "; split normal (_sigma_upper/_sigma_lower, mode = value, truncated)"
                if any(name.endswith("_sigma_upper") for name in table.columns)
                else ""
            ),
        },
        "summary": {"retain": float(retain), "percentiles": [float(q) for q in percentiles]},
    }
    # The table goes to the engine in blocks of whole chunks, so that the engine's copy of it
    # stays small; the engine reports invalid rows (skip_invalid) and never checks twice.
    # With a progress step of `every` chunks, a block holds a whole number of steps, so that the
    # steps run on across blocks.
    block_chunks = max(1, 16384 // chunk)
    if every:
        block_chunks = every * max(1, block_chunks // every)
    block = chunk * block_chunks
    core_options = _core_options(options, threads=int(threads or 0), chunk_size=chunk)
    checked = None
    if bad_rows == "raise":
        checked = _raise_for_rows(table, block, core_options)  # every row, before any run or file
    sink: _FileSink | _MemorySink
    if output is not None:
        source = Path(cases) if isinstance(cases, (str, os.PathLike)) else None
        sink = _FileSink(Path(output), config, species, grid, runs, overwrite, source, inputs)
    else:
        sink = _MemorySink()
    begin = sink.completed
    bar = Progress(len(table), begin, progress)
    runs_per_case = 1 + runs
    interrupted = False
    try:
        if client is not None and begin < len(table):
            _run_distributed(client, table, begin, options, chunk, threads, sink.append, bar, every)
        for first in range(begin, len(table) if client is None else begin, block):
            last = min(first + block, len(table))
            if first == 0 and checked is not None:
                part = checked  # the block the check read
            else:
                part = table.to_core(first_key=first, rows=slice(first, last))

            def on_progress(done: int, total: int, first: int = first) -> None:
                bar.update(first + done // runs_per_case)

            _core.run_batch(
                part, 0, last - first, core_options, sink.target, on_progress, 100, every
            )
        bar.finish(sink.completed)
    except KeyboardInterrupt:
        interrupted = True
    finally:
        bar.close()
        sink.close()
    if isinstance(sink, _FileSink):
        result = open_comparison(sink.path)
    else:
        result = sink.result(species, grid, runs, config)
    result.resumed_from = begin
    if interrupted:
        raise Interrupted(result)
    return result


def _raise_for_rows(table: CaseTable, block: int, core_options: Any) -> Any:
    """ValueError listing the first ten invalid rows (row and column named) and their number.
    Returns the engine's table of the first block, for the run to reuse."""
    listed: list[str] = []
    bad = 0
    first_part = None
    for first in range(0, len(table), block):
        part = table.to_core(first_key=first, rows=slice(first, min(first + block, len(table))))
        if first == 0:
            first_part = part
        for error in _core.check_case_table(part, core_options):
            if error:
                bad += 1
                if len(listed) < 10:
                    listed.append(error)
    if bad:
        text = "".join(f"\n  {e}" for e in listed) + ("\n  ..." if bad > 10 else "")
        raise ValueError(f"case table: {bad} invalid row{'s' if bad > 1 else ''}{text}")
    return first_part
