"""The demo: Jeans escape of every species of the invented demo catalogue."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from .catalogue import CaseTable, demo_catalogue_path, read_case_table
from .jeans import jeans_escape_rate, jeans_flux, jeans_parameter
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
    shape = (radius[:, None], temperature[:, None], mass[None, :], planet_mass[:, None])
    r, t, m, mp = shape
    lam = jeans_parameter(t, m, mp, r)
    flux = jeans_flux(density, t, m, mp, r)
    rate = jeans_escape_rate(density, t, m, mp, r)
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


def write_snapshot(result: SnapshotTable, path: str | Path) -> Path:
    """Write ``result`` to HDF5: dimensions ``case`` (appendable, as in sweep files) and
    ``species``; the case labels are the variable ``case_name``."""
    from .results import ResultAppender, ResultWriter  # C++ writer: atomic, scales, units

    path = Path(path)
    schema = ResultWriter(path, {"kind": "snapshot", "catalogue": result.source})
    schema.add_coordinate("species", result.species, long_name="species")
    variables = [
        ("case_name", str, [], "1", "planet case", np.array(result.cases, dtype=object)),
        (
            "exobase_radius",
            float,
            [],
            "m",
            "exobase radius from the planet's centre",
            result.exobase_radius,
        ),
        ("exobase_temperature", float, [], "K", "exobase temperature", result.exobase_temperature),
        (
            "density",
            float,
            ["species"],
            "m-3",
            "number density at the exobase (NaN: species absent)",
            result.density,
        ),
        (
            "jeans_parameter",
            float,
            ["species"],
            "1",
            "Jeans parameter at the exobase",
            result.jeans_parameter,
        ),
        ("jeans_flux", float, ["species"], "m-2 s-1", "Jeans escape flux", result.jeans_flux),
        ("escape_rate", float, ["species"], "s-1", "global Jeans escape rate", result.escape_rate),
    ]
    for name, dtype, dims, units, long_name, _ in variables:
        schema.add_case_variable(name, dtype, dims, units=units, long_name=long_name)
    with ResultAppender(schema) as out:
        out.append({name: values for name, *_, values in variables})
    return path


def run_demo(output: str | Path = "exosieve-demo.h5") -> SnapshotTable:
    """Run the demo on the invented catalogue, print the table and write ``output``."""
    result = snapshot(read_case_table(demo_catalogue_path()))
    print(format_snapshot(result))
    path = write_snapshot(result, output)
    print(f"\nwrote {path.resolve()}")
    return result
