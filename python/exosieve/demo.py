"""The demo: Jeans escape of every species of the invented demo catalogue."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .batch import Comparison
from .catalogue import demo_catalogue_path


@dataclass
class SnapshotTable:
    """Jeans escape of each case and species at its exobase at the start of its run, as the
    sweep engine found it (a prescribed exobase of the row's own composition, or the exobase of
    its thermosphere), and the Jeans parameter at the end.

    Arrays have shape (case, species); entries for absent species are NaN.
    """

    cases: list[str]
    species: list[str]
    exobase_radius: NDArray[np.float64]  # [m], per case, at the start
    exobase_temperature: NDArray[np.float64]  # [K], per case, at the start
    jeans_parameter: NDArray[np.float64]  # [1], at the start
    jeans_parameter_end: NDArray[np.float64]  # [1], at the end
    jeans_flux: NDArray[np.float64]  # [m^-2 s^-1], escape rate over the exobase's area
    escape_rate: NDArray[np.float64]  # [s^-1], thermal, at the start
    source: str


def snapshot(result: Comparison) -> SnapshotTable:
    """The exobase of every case of a sweep at its start: Jeans parameters, fluxes, rates."""
    radius = np.asarray(result["exobase_radius"], dtype=float)
    rate = np.asarray(result["escape_rate_start"], dtype=float)
    flux = rate / (4.0 * np.pi * radius[:, None] ** 2)  # over the exobase sphere [m^-2 s^-1]
    return SnapshotTable(
        list(result["case"]),
        list(result.species),
        radius,
        np.asarray(result["exobase_temperature_start"], dtype=float),
        np.asarray(result["jeans_parameter_start"], dtype=float),
        np.asarray(result["jeans_parameter_end"], dtype=float),
        flux,
        rate,
        str(result.config.get("table", {}).get("source", "")),
    )


def format_snapshot(result: SnapshotTable) -> str:
    """A plain-text table: one line per case and species present."""
    lines = [
        f"{'case':10s} {'species':7s} {'T_exo [K]':>9s} {'r_exo [km]':>10s} "
        f"{'lambda [1]':>10s} {'flux [m^-2 s^-1]':>16s} {'rate [s^-1]':>11s} "
        f"{'lambda end':>10s}"
    ]
    for i, case in enumerate(result.cases):
        for j, name in enumerate(result.species):
            if np.isnan(result.jeans_parameter[i, j]):
                continue
            lines.append(
                f"{case:10s} {name:7s} {result.exobase_temperature[i]:9.0f} "
                f"{result.exobase_radius[i] / 1e3:10.0f} {result.jeans_parameter[i, j]:10.2f} "
                f"{result.jeans_flux[i, j]:16.3e} {result.escape_rate[i, j]:11.3e} "
                f"{result.jeans_parameter_end[i, j]:10.2f}"
            )
    return "\n".join(lines)


def run_demo(
    output: str | Path = "exosieve-demo.h5",
    chart: str | Path | None = "exosieve-demo.png",
    samples: int = 100,
    seed: int = 0,
) -> Any:
    """The demo on the invented catalogue ``data/demo_planets.csv``.

    Evolves every case over its star's life with ``samples`` Monte Carlo draws over the stated
    uncertainties, prints each case's exobase at the start of its run (the young star's XUV
    heats it) with the Jeans parameters, fluxes and rates of every species and the Jeans
    parameter at the end, writes the comparison to ``output`` (HDF5), draws the retention chart
    to ``chart`` (PNG, if matplotlib is installed) and prints the probability that each planet
    keeps each gas.

    Returns the :class:`exosieve.Comparison`.
    """
    from .batch import compare

    catalogue = demo_catalogue_path()
    print(
        f"Evolving {catalogue.name} (invented planets) over each star's life, {samples} Monte "
        "Carlo samples per case ..."
    )
    result = compare(
        catalogue, samples=samples, seed=seed, output=output, overwrite=True, progress=True
    )
    print("\nExobases at the start of each run (10 Myr), and the Jeans parameter at the end\n")
    print(format_snapshot(snapshot(result)))
    table = result.summary.pivot(
        index="case", columns="species", values="probability_retained" if samples else "retained"
    )
    names = list(dict.fromkeys(result.summary["case"]))
    print("\nProbability of keeping more than half of each gas [1] (blank: gas absent)\n")
    print(table.loc[names, result.species].to_string(float_format=lambda v: f"{v:.2f}", na_rep=""))
    print(f"\nwrote {Path(output).resolve()}")
    if chart is not None:
        try:
            import matplotlib
        except ImportError:
            print("matplotlib is not installed: no chart drawn")
            return result
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt

        from .plot import retention_chart

        fig = retention_chart(result)
        fig.savefig(chart, dpi=110)
        plt.close(fig)
        print(f"wrote {Path(chart).resolve()}")
    return result
