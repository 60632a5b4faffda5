"""The demo: Jeans escape of every species of the invented demo catalogue."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .catalogue import CaseTable, demo_catalogue_path, read_case_table
from .jeans import jeans_flux, jeans_parameter
from .species import species


@dataclass
class SnapshotTable:
    """Jeans escape of each case and species at the catalogue's present-day exobase.

    Arrays have shape (case, species); entries for absent species are NaN.
    """

    cases: list[str]
    species: list[str]
    exobase_radius: NDArray[np.float64]  # [m], per case
    exobase_temperature: NDArray[np.float64]  # [K], per case
    density: NDArray[np.float64]  # [m^-3]
    jeans_parameter: NDArray[np.float64]  # [1]
    jeans_flux: NDArray[np.float64]  # [m^-2 s^-1]
    escape_rate: NDArray[np.float64]  # [s^-1]
    source: str


def snapshot(table: CaseTable) -> SnapshotTable:
    """Jeans parameters, fluxes and escape rates for every case and species of ``table``."""
    radius = np.array(table.column("planet_radius")) + np.array(table.column("exobase_altitude"))
    temperature = np.array(table.column("exobase_temperature"))
    planet_mass = np.array(table.column("planet_mass"))
    n_total = np.array(table.column("exobase_density"))
    x = np.array([table.column(f"x_{s}") for s in table.species]).T  # (case, species)
    mass = np.array([species(s).mass for s in table.species])
    density = x * n_total[:, None]
    r, t, m, mp = radius[:, None], temperature[:, None], mass[None, :], planet_mass[:, None]
    lam = np.asarray(jeans_parameter(t, m, mp, r))
    flux = np.asarray(jeans_flux(density, t, m, mp, r))
    rate = 4.0 * np.pi * r**2 * flux  # global rate [s^-1] from the flux just computed
    absent = x == 0.0
    for a in (density, flux, rate):
        a[absent] = np.nan
    lam = np.where(absent, np.nan, lam)
    return SnapshotTable(
        table.names,
        list(table.species),
        radius,
        temperature,
        density,
        lam,
        flux,
        rate,
        table.source,
    )


def format_snapshot(result: SnapshotTable) -> str:
    """A plain-text table: one line per case and species present."""
    lines = [
        f"{'case':10s} {'species':7s} {'T_exo [K]':>9s} {'r_exo [km]':>10s} "
        f"{'n [m^-3]':>10s} {'lambda [1]':>10s} {'flux [m^-2 s^-1]':>16s} "
        f"{'rate [s^-1]':>11s}"
    ]
    for i, case in enumerate(result.cases):
        for j, name in enumerate(result.species):
            if np.isnan(result.density[i, j]):
                continue
            lines.append(
                f"{case:10s} {name:7s} {result.exobase_temperature[i]:9.0f} "
                f"{result.exobase_radius[i] / 1e3:10.0f} {result.density[i, j]:10.3e} "
                f"{result.jeans_parameter[i, j]:10.2f} {result.jeans_flux[i, j]:16.3e} "
                f"{result.escape_rate[i, j]:11.3e}"
            )
    return "\n".join(lines)


def run_demo(
    output: str | Path = "exosieve-demo.h5",
    chart: str | Path | None = "exosieve-demo.png",
    samples: int = 100,
    seed: int = 0,
) -> Any:
    """The demo on the invented catalogue ``data/demo_planets.csv``.

    Prints the present-day Jeans parameters and fluxes of every species, evolves every case over
    its star's life with ``samples`` Monte Carlo draws over the stated uncertainties, writes the
    comparison to ``output`` (HDF5), draws the retention chart to ``chart`` (PNG, if matplotlib
    is installed) and prints the probability that each planet keeps each gas.

    Returns the :class:`exosieve.Comparison`.
    """
    from .batch import compare

    catalogue = demo_catalogue_path()
    print("Present-day exobases of the invented demo catalogue\n")
    print(format_snapshot(snapshot(read_case_table(catalogue))))
    print(
        f"\nEvolving {catalogue.name} over each star's life, {samples} Monte Carlo samples "
        "per case ..."
    )
    result = compare(
        catalogue, samples=samples, seed=seed, output=output, overwrite=True, progress=True
    )
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
