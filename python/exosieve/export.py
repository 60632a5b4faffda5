"""A sweep's results as one flat table: one row per case, headers ``quantity [unit]``.

:func:`comparison_table` turns a :class:`~exosieve.Comparison` into a pandas DataFrame (and,
with ``path``, a CSV file) laid out like a case table: the text columns ``case``, ``error``
(and with samples ``sample_error``; empty: none), then ``row`` and every per-case number of
the result file under its own name (``planet_mass [kg]``, ``age_end [s]``, ...), then every
per-species number at the end or the start of the run as ``<name>_<species> [unit]``
(``final_retained_fraction_N2 [1]``, ``depletion_time_He [s]``), as the case tables name
per-species columns (``x_N2``). With Monte Carlo samples the summary's
``probability_retained`` and retained-fraction percentiles follow, per species. Units are
those of the result file's ``units`` attributes (SI, UDUNITS-2 strings); codes keep the
file's values (``regime_start_<species>``: -1 none, 0 jeans, 1 enhanced_jeans, 2 transition,
3 hydrodynamic, as its ``flag_meanings`` say). Histories (over ``time``) and single samples
are not in it: they stay in the result file.

Examples
--------
>>> import pandas as pd
>>> from exosieve import compare
>>> from exosieve.export import comparison_table
>>> cases = pd.DataFrame({
...     "case": ["warm"], "planet_mass [M_earth]": [1.0], "planet_radius [R_earth]": [1.0],
...     "exobase_altitude [km]": [500.0], "exobase_density [m-3]": [1e13],
...     "exobase_temperature [K]": [900.0], "inventory [particles]": [1e37],
...     "x_N2": [0.75], "x_He": [0.25], "exobase_composition": ["bulk"]})
>>> table = comparison_table(compare(cases, threads=1, times=4))
>>> table.columns[:4].tolist()
['case', 'error', 'row [1]', 'steps [1]']
>>> table["final_retained_fraction_N2 [1]"].round(6).tolist()
[1.0]
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["comparison_table", "split_header"]


def split_header(header: str) -> tuple[str, str | None]:
    """``"planet_mass [kg]"`` -> ``("planet_mass", "kg")``; a header without a unit -> (it,
    None)."""
    text = header.strip()
    if text.endswith("]") and " [" in text:
        name, unit = text[:-1].split(" [", 1)
        return name, unit
    return text, None


def comparison_table(
    comparison: Any,
    path: str | os.PathLike[str] | None = None,
    *,
    species: list[str] | None = None,
    retain: float | None = None,
) -> Any:
    """One row per case: the per-case and per-species numbers of a sweep, headers with units.

    Parameters
    ----------
    comparison : Comparison
        From :func:`exosieve.compare` or :func:`exosieve.open_comparison`.
    path : str or path-like, optional
        Also write the table there as CSV (UTF-8, one header line, numbers as Python writes
        them, so that ``pandas.read_csv(path)`` gives back the same values).
    species : list of str, optional
        Species whose columns to include (default: every species of the sweep; one name is
        one species).
    retain : float, optional
        Threshold of ``probability_retained`` [1] with samples (default: the run's).

    Returns
    -------
    pandas.DataFrame
        Columns as described in :mod:`exosieve.export`; ``frame.attrs["units"]`` maps each
        header to its unit.
    """
    import pandas as pd

    names = list(comparison.species)
    if isinstance(species, str):
        species = [species]
    chosen = names if species is None else [str(s) for s in species]
    own = getattr(comparison, "path", None)
    if path is not None and own is not None and Path(path).resolve() == Path(own).resolve():
        raise ValueError(f"path {str(path)!r} is the comparison's own result file; choose another")
    unknown = [s for s in chosen if s not in names]
    if unknown:
        raise ValueError(f"species: {unknown} are not in the comparison (have {names})")
    picked = [names.index(s) for s in chosen]
    columns: dict[str, Any] = {"case": np.asarray(comparison["case"], dtype=object)}
    numbers: dict[str, Any] = {"row [1]": np.asarray(comparison["row"])}
    units: dict[str, str] = {"row [1]": "1"}
    per_species: list[tuple[str, str, Any]] = []
    for name, (dims, unit, _) in comparison.variables.items():
        if dims == ["case"]:
            values = np.asarray(comparison[name])
            if values.dtype.kind in "OUS":  # text (error messages): no unit
                columns[name] = values.astype(object)
                continue
            header = f"{name} [{unit}]"
            numbers[header] = values
            units[header] = unit
        elif dims == ["case", "species"]:
            per_species.append((name, unit, np.asarray(comparison[name])))
    if comparison.samples and len(comparison):
        summary = comparison.summarize(retain=retain)
        extra = [c for c in summary.columns if c == "probability_retained"]
        extra += [c for c in summary.columns if c.startswith("retained_fraction_p")]
        valid = summary[summary["species"] != ""]
        for name in extra:
            grid = np.full((len(comparison), len(names)), np.nan)
            where = np.searchsorted(np.asarray(comparison["row"]), valid["row"].to_numpy())
            species_index = valid["species"].map({s: j for j, s in enumerate(names)}).to_numpy()
            grid[where, species_index.astype(int)] = valid[name].to_numpy(dtype=float)
            per_species.append((name, "1", grid))
    for name, unit, values in per_species:
        for j, gas in zip(picked, chosen, strict=True):
            header = f"{name}_{gas} [{unit}]"
            numbers[header] = values[:, j]
            units[header] = unit
    frame = pd.DataFrame({**columns, **numbers})
    frame.attrs["units"] = units
    if path is not None:
        frame.to_csv(Path(path), index=False, encoding="utf-8")
    return frame
