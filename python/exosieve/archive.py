"""Case tables from the public exoplanet archives' planetary-systems tables.

The archives' planetary-systems tables, downloaded as CSV, are comment lines (first character
``#``) followed by a header of column names and one row per planet (or, for a table with
several parameter sets per planet, per set). :func:`read_archive` reads that layout and
:func:`archive_cases` turns it into an exosieve case table (a pandas DataFrame with
``quantity [unit]`` headers, which :func:`exosieve.compare` accepts as it is).

Archive columns read (the archives' own names; every other column is ignored):

=====================  ========================================  ==========================
archive column         meaning                                   case-table column
=====================  ========================================  ==========================
``pl_name``            planet name                               ``case``
``hostname``           host star name                            ``star``
``pl_bmasse``          planet mass [M_earth]                     ``planet_mass``
``pl_rade``            planet radius [R_earth]                   ``planet_radius``
``pl_orbsmax``         semi-major axis [au]                      ``semi_major_axis``
``st_mass``            stellar mass [M_sun]                      ``star_mass``
``st_lum``             stellar luminosity [log10(L/L_sun)]       ``star_luminosity`` [L_sun]
``st_age``             stellar age [Gyr]                         ``star_age``
``pl_eqt``             equilibrium temperature [K]               sets ``exobase_temperature``
``default_flag``       1: the archive's default parameter set    (rows with 0 are left out)
=====================  ========================================  ==========================

Each quantity ``q`` may come with ``qerr1`` (upper error, >= 0), ``qerr2`` (lower error,
<= 0) and ``qlim`` (limit flag: 1 upper limit, -1 lower limit, 0 or empty a measurement).

Rules (each is stated again in the README; every default is a case-table column, and a
column of the case table given in the archive table itself, with its ``[unit]`` header, wins
row by row wherever its cell is not empty):

- **Errors** become split-normal uncertainties (``<quantity>_sigma_upper`` = ``qerr1``,
  ``<quantity>_sigma_lower`` = ``-qerr2``, same unit as the value, the value being the
  mode); one error without the other is used on both sides. The stellar age's errors are not
  used (a case table's ages take no uncertainty). The luminosity's errors in dex
  become the linear widths ``L (10^err1 - 1)`` and ``L (1 - 10^err2)``.
- **Limits**: a value that is only a limit (``qlim`` = +-1) on any quantity read is not a
  measurement. ``limits="drop"`` (default) leaves the row out; ``limits="bound"`` keeps it
  with the limit as the value and no uncertainty (for an upper limit on the mass, its
  retention is then an upper bound). Either way every such row is reported
  (:attr:`ArchiveCases.limited`).
- **Bad values**: a mass, radius, orbit, stellar mass, age or temperature <= 0, a value that
  is not a number, an upper error < 0, a lower error > 0 or a limit flag other than -1, 0, 1
  is refused (ValueError naming the column, the line and the value).
- **Missing**: a row without mass or radius is left out and reported. Without all three of
  semi-major axis, stellar mass and luminosity the row has no star (none of the three is
  written: the case table needs all three together).
- **Equilibrium temperature**: ``pl_eqt``, else computed from the star,
  ``T_eq = (L / (16 pi sigma a^2))^(1/4)`` (zero Bond albedo, full redistribution); a row
  with neither is left out.
- **Exobase temperature**: constant, ``exobase_temperature = exobase_temperature_factor *
  T_eq`` (default factor 4: Earth's exobase, about 1000 K at moderate solar activity, over its
  255 K equilibrium temperature; `common practice`, from memory). CO2-rich thermospheres (Venus,
  Mars) are much cooler and H2-rich ones hotter: override with ``exobase_temperature`` or the
  XUV law columns. ``pl_eqt`` errors scale into split-normal widths of it.
- **Planet class and bulk composition** by radius against the radius valley
  (``radius_valley``, default 1.7 R_earth; the gap of Fulton et al. 2017 between about 1.5
  and 2.0 R_earth, from memory): below it **rocky** with a secondary atmosphere,
  ``x_N2, x_CO2, x_H2O = 0.8, 0.1, 0.1`` (an assumption, no source: override with ``x_``
  columns); at or above it **gas-rich**, H2/He of solar composition: He/H = 10^(10.93 - 12)
  by number (Asplund et al. 2009, from memory), i.e. ``x_He = 2 y / (1 + 2 y)`` with y = He/H
  and H as H2.
- **Upper atmosphere**: a thermosphere row (the exobase is found from the gas at every step),
  isothermal at the exobase temperature: ``homopause_density`` = 1e19 m-3 (Earth's total
  number density near 100 km, U.S. Standard Atmosphere 1976, from memory; `common practice`
  for other planets) and ``homopause_altitude`` = ``homopause_scale_heights`` (default 13)
  scale heights ``k T_eq / (m g)`` of the row's bulk gas at the surface gravity (Earth: 13 x
  7.5 km, about its 100 km homopause). A row given ``exobase_altitude`` and
  ``exobase_density`` columns of the user's instead has a prescribed exobase, which needs its
  own composition too: ``exobase_x_<species>`` columns (the bulk fractions are not used as
  the exobase's).
- **Inventory**: rocky, ``surface_pressure`` 1 bar (Earth's; an assumption); gas-rich,
  ``inventory`` = ``envelope_mass_fraction`` (default 0.01, a sub-Neptune's few per cent of
  H/He, Lopez & Fortney 2014, from memory) of the planet mass over the bulk gas's mean
  particle mass.

The case table is written with these columns: ``case``, ``star``, ``planet_mass
[M_earth]``, ``planet_radius [R_earth]``, ``semi_major_axis [au]``, ``star_mass [M_sun]``,
``star_luminosity [L_sun]``, ``star_age [Gyr]``, their ``_sigma_upper``/``_sigma_lower``
widths where the archive gives errors, ``homopause_altitude [km]``, ``homopause_density
[m-3]``, ``exobase_temperature [K]`` (and widths), ``surface_pressure [bar]``, ``inventory
[particles]``, ``x_N2``, ``x_CO2``, ``x_H2O``, ``x_H2``, ``x_He``, ``comment`` (the class),
and any case-table column the archive table carried.

Examples
--------
>>> from exosieve.archive import archive_cases, archive_sample_path
>>> converted = archive_cases(archive_sample_path())
>>> converted.cases.loc[0, "case"], converted.cases.loc[0, "comment"][:5]
('Vessir b', 'rocky')
>>> sorted({note.planet for note in converted.limited})
['Vessir d']
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, NamedTuple

import numpy as np
from numpy.typing import NDArray

from . import constants as c
from ._arrays import real_number
from .catalogue import (
    _HEADER,
    _column_values,
    _data_path,
    _is_astropy_table,
    _si_unit,
    frame_from_table,
    unit_factor,
    width_column,
)
from .species import species as _species

#: Stefan-Boltzmann constant [W m^-2 K^-4]: 2 pi^5 k^4 / (15 h^3 c^2) with the exact SI
#: values of k, h and c (SI 2019).
STEFAN_BOLTZMANN: float = 2.0 * math.pi**5 * c.K_B**4 / (15.0 * 6.62607015e-34**3 * 299792458.0**2)

#: Solar helium abundance by number, He/H = 10^(10.93 - 12) (Asplund et al. 2009, from memory).
SOLAR_HELIUM_PER_HYDROGEN: float = 10.0 ** (10.93 - 12.0)

#: Rocky planets' assumed secondary atmosphere (mole fractions [1]; an assumption, no source).
ROCKY_COMPOSITION: dict[str, float] = {"N2": 0.8, "CO2": 0.1, "H2O": 0.1}

#: Gas-rich planets' H2/He of solar composition (mole fractions [1], H as H2).
GAS_COMPOSITION: dict[str, float] = {
    "H2": 1.0 / (1.0 + 2.0 * SOLAR_HELIUM_PER_HYDROGEN),
    "He": 2.0 * SOLAR_HELIUM_PER_HYDROGEN / (1.0 + 2.0 * SOLAR_HELIUM_PER_HYDROGEN),
}

#: Archive quantities read: archive column, case-table column, display unit, SI factor of the
#: archive's unit (None: log10 of L/L_sun).
_QUANTITIES: list[tuple[str, str, str, float | None]] = [
    ("pl_bmasse", "planet_mass", "M_earth", c.M_EARTH),
    ("pl_rade", "planet_radius", "R_earth", c.R_EARTH),
    ("pl_orbsmax", "semi_major_axis", "au", c.AU),
    ("st_mass", "star_mass", "M_sun", c.M_SUN),
    ("st_lum", "star_luminosity", "L_sun", None),
    ("st_age", "star_age", "Gyr", c.GYR),
    ("pl_eqt", "equilibrium_temperature", "K", 1.0),
]

_STAR = ("semi_major_axis", "star_mass", "star_luminosity")

#: Display units of the columns written (SI unit otherwise).
_DISPLAY = {
    "planet_mass": "M_earth",
    "planet_radius": "R_earth",
    "semi_major_axis": "au",
    "star_mass": "M_sun",
    "star_luminosity": "L_sun",
    "star_age": "Gyr",
    "homopause_altitude": "km",
    "homopause_density": "m-3",
    "exobase_temperature": "K",
    "surface_pressure": "bar",
    "inventory": "particles",
}

#: A case-table column given in the archive table clears these defaults of its row.
_CLEARS: dict[str, tuple[str, ...]] = {
    "exobase_altitude": ("homopause_altitude", "homopause_density"),
    "exobase_density": ("homopause_altitude", "homopause_density"),
    "temperature_reference": ("exobase_temperature",),
    "inventory": ("surface_pressure",),
    "surface_pressure": ("inventory",),
}

LIMIT_RULES = ("drop", "bound")


class LimitNote(NamedTuple):
    """A row whose archive value of a quantity is a limit, not a measurement."""

    planet: str  #: ``pl_name``
    line: int  #: line of the archive file (or row + 1 of a DataFrame)
    column: str  #: archive column, e.g. ``pl_bmasse``
    kind: str  #: ``"upper limit"`` or ``"lower limit"``
    value: float  #: the limit, in the archive's unit
    action: str  #: ``"dropped"`` or ``"kept with the limit as its value"``


class DroppedNote(NamedTuple):
    """A row left out of the case table and why."""

    planet: str  #: ``pl_name``
    line: int  #: line of the archive file (or row + 1 of a DataFrame)
    reason: str  #: why


class DefaultNote(NamedTuple):
    """A case-table column filled by a default rule, and the planets it was filled for."""

    column: str  #: case-table column
    rule: str  #: the rule, with its numbers
    planets: list[str]  #: planets (``pl_name``) whose value comes from the rule


@dataclass
class ArchiveCases:
    """An archive table converted to a case table.

    Attributes
    ----------
    cases : pandas.DataFrame
        The case table, headers ``quantity [unit]``: pass it to :func:`exosieve.compare` or
        write it with :meth:`to_csv`.
    limited : list of LimitNote
        Every row with a limit flag, and what was done with it.
    dropped : list of DroppedNote
        Rows left out (limits under ``limits="drop"``, no mass or radius, no temperature).
    defaults : list of DefaultNote
        Columns filled by a default rule, with the planets concerned.
    source : str
        Where the archive table came from.
    """

    cases: Any
    limited: list[LimitNote] = field(default_factory=list)
    dropped: list[DroppedNote] = field(default_factory=list)
    defaults: list[DefaultNote] = field(default_factory=list)
    source: str = ""

    def to_csv(self, path: str | Path) -> Path:
        """Write the case table to ``path`` as CSV, a comment line naming its source first."""
        path = Path(path)
        with path.open("w", encoding="utf-8", newline="") as handle:
            handle.write(f"# exosieve case table converted from the archive table {self.source}\n")
            handle.write("# defaults and limits: see exosieve.archive (README: archive tables)\n")
            self.cases.to_csv(handle, index=False)
        return path

    def report(self) -> str:
        """The limited, dropped and defaulted rows as text, one line each."""
        lines = [f"{len(self.cases)} cases from {self.source}"]
        for n in self.limited:
            lines.append(
                f"limit: {n.planet} (line {n.line}): {n.column} is an {n.kind} ({n.value:g}); "
                f"{n.action}"
            )
        for d in self.dropped:
            lines.append(f"dropped: {d.planet} (line {d.line}): {d.reason}")
        for note in self.defaults:
            shown = ", ".join(note.planets[:5]) + (" ..." if len(note.planets) > 5 else "")
            lines.append(f"default: {note.column} = {note.rule} for {len(note.planets)}: {shown}")
        return "\n".join(lines)


def archive_sample_path() -> Path:
    """Path of the small invented table in the archive layout shipped with the package."""
    return _data_path("archive_layout_sample.csv")


def read_archive(archive: str | Path | Any) -> tuple[Any, NDArray[np.int64], str]:
    """Read a table in the archive layout.

    Parameters
    ----------
    archive : str, Path, pandas.DataFrame or astropy Table
        A CSV file (comment lines starting with ``#``, then the header) or a DataFrame with
        the archive's column names; an astropy Table or QTable with them (columns with units
        converted to the archive's units: :func:`_frame_from_archive_table`).

    Returns
    -------
    (pandas.DataFrame, ndarray of int, str)
        The table (text columns as text, everything else as float, NaN where empty), the line
        of the file each row comes from (a DataFrame: row number + 1), and the source's name.
    """
    import pandas as pd

    if isinstance(archive, (str, Path)):
        path = Path(archive)
        source = str(path)
        try:
            text = path.read_text(encoding="utf-8-sig")
        except UnicodeDecodeError:
            raise ValueError(f"{source}: not UTF-8 text; save the table as UTF-8") from None
        lines = text.splitlines(keepends=True)
        kept = [k for k, line in enumerate(lines, start=1) if not line.startswith("#")]
        kept = [k for k in kept if lines[k - 1].strip()]
        if not kept:
            raise ValueError(f"{source}: no header line")
        body = "".join(lines[k - 1] for k in kept)
        frame = pd.read_csv(io.StringIO(body), dtype=str, keep_default_na=False)
        numbers = np.array(kept[1 : 1 + len(frame)], dtype=np.int64)
    elif _is_astropy_table(archive):
        source = type(archive).__name__
        frame = _frame_from_archive_table(archive).astype(object)
        numbers = np.arange(1, len(frame) + 1, dtype=np.int64)
    elif hasattr(archive, "columns") and hasattr(archive, "index"):
        source = "DataFrame"
        frame = archive.reset_index(drop=True).astype(object)
        numbers = np.arange(1, len(frame) + 1, dtype=np.int64)
    else:
        raise ValueError(
            "archive must be a CSV path or a pandas DataFrame (or an astropy Table), got "
            f"{type(archive).__name__}"
        )
    frame.columns = [str(name).strip() for name in frame.columns]
    if "pl_name" not in frame.columns:
        raise ValueError(f"{source}: no column 'pl_name' (is this a planetary-systems table?)")
    out = {}
    for name in frame.columns:
        if name in ("pl_name", "hostname") or _HEADER.match(name) is None:
            out[name] = frame[name].fillna("").astype(str).str.strip()
            continue
        raw = frame[name]
        text = raw.astype("string").str.strip().fillna("")
        missing = raw.isna().to_numpy() | (text == "").to_numpy() | (text.str.lower() == "nan")
        values = pd.to_numeric(raw.where(~missing), errors="coerce").to_numpy(dtype=float)
        bad = ~missing & ~np.isfinite(values)
        wanted = _is_read(name)
        if bad.any() and wanted:
            k = int(np.nonzero(bad)[0][0])
            raise ValueError(
                f"{source} line {numbers[k]} column '{name}': {text.iloc[k]!r} is not a finite "
                "number"
            )
        out[name] = values if wanted or not bad.any() else text
    return pd.DataFrame(out), numbers, source


def _frame_from_archive_table(table: Any) -> Any:
    """An astropy Table or QTable in the archive layout as a DataFrame: the archive's columns
    read here (``pl_bmasse`` and its ``err1``/``err2``, ...) with a unit are converted to the
    archive's own unit (``st_lum`` stays log10 L/L_sun: a ``dex(solLum)`` value is converted
    with the IAU 2015 L_sun, its errors, in dex, are taken as they are); every other column
    as :func:`~exosieve.catalogue.frame_from_table` takes it (case-table columns with units
    become ``name [unit]`` headers)."""
    from . import _units

    archive_units = {q: (base, factor) for q, base, _, factor in _QUANTITIES}
    plain_table = table.copy(copy_data=False)
    for name in table.colnames:
        column = table[name]
        unit = getattr(column, "unit", None)
        stem = name.removesuffix("err1").removesuffix("err2")
        if unit is None or stem not in archive_units:
            continue
        base, factor = archive_units[stem]
        values = np.asarray(_column_values(column), dtype=float)
        physical = getattr(unit, "physical_unit", None)  # dex(solLum): solLum
        try:
            if factor is not None:
                values = values * (_units.unit_factor(unit, _si_unit(base)) / factor)
            elif str(getattr(unit, "function_unit", unit)) != "dex":
                raise _units.WrongDimension("")
            elif name == stem and physical is not None and str(physical) != "":
                values = values + np.log10(_units.unit_factor(physical, "W") / c.L_SUN)
        except _units.WrongDimension as err:
            need = "log10 L/L_sun (dex)" if factor is None else f"a unit of {_si_unit(base)}"
            raise ValueError(
                f"{type(table).__name__} column '{name}': unit '{unit}' does not measure "
                f"{base} (need {need}){'; ' + str(err) if str(err) else ''}"
            ) from None
        mask = getattr(column, "mask", None)
        if mask is not None:
            values = np.where(np.asarray(mask, dtype=bool), np.nan, values)
        plain_table[name] = values
    return frame_from_table(plain_table)


def _is_read(name: str) -> bool:
    """Whether `name` is an archive column read here or a case-table column."""
    archive = {q for q, *_ in _QUANTITIES}
    stem = name.removesuffix("err1").removesuffix("err2").removesuffix("lim")
    if name == "default_flag" or stem in archive:
        return True
    match = _HEADER.match(name)
    return bool(match and match.group(2) is not None and _si_unit(match.group(1)) is not None)


def archive_cases(
    archive: str | Path | Any,
    *,
    limits: str = "drop",
    radius_valley: float = 1.7 * c.R_EARTH,
    exobase_temperature_factor: float = 4.0,
    homopause_density: float = 1e19,
    homopause_scale_heights: float = 13.0,
    surface_pressure: float = 1e5,
    envelope_mass_fraction: float = 0.01,
) -> ArchiveCases:
    """Convert an archive planetary-systems table to a case table (rules: module docstring).

    Parameters
    ----------
    archive : str, Path, pandas.DataFrame or astropy Table
        The archive table (see :func:`read_archive`).
    limits : {"drop", "bound"}
        Rows whose value of a quantity is only a limit: left out, or kept with the limit as
        the value and no uncertainty. Reported either way.
    radius_valley : float
        Radius below which a planet counts as rocky [m]. Default 1.7 R_earth.
    exobase_temperature_factor : float
        Exobase temperature over the equilibrium temperature [1]. Default 4.
    homopause_density : float
        Total number density at the homopause [m-3]. Default 1e19.
    homopause_scale_heights : float
        Homopause altitude in scale heights ``k T_eq / (m g)`` [1]. Default 13.
    surface_pressure : float
        Rocky planets' initial inventory as a surface pressure [Pa]. Default 1e5 (1 bar).
    envelope_mass_fraction : float
        Gas-rich planets' H2/He inventory as a share of the planet mass [1]. Default 0.01.

    Returns
    -------
    ArchiveCases
    """
    if limits not in LIMIT_RULES:
        raise ValueError(f"limits must be one of {LIMIT_RULES}, got {limits!r}")
    options = {
        "radius_valley": (radius_valley, "m"),
        "exobase_temperature_factor": (exobase_temperature_factor, "1"),
        "homopause_density": (homopause_density, "m-3"),
        "homopause_scale_heights": (homopause_scale_heights, "1"),
        "surface_pressure": (surface_pressure, "Pa"),
        "envelope_mass_fraction": (envelope_mass_fraction, "1"),
    }
    value: dict[str, float] = {}
    for name, (number, unit) in options.items():
        value[name] = real_number(number, name, unit)
        if not value[name] > 0.0:
            raise ValueError(f"{name} must be > 0 [{unit}], got {value[name]!r}")
    if not value["envelope_mass_fraction"] < 1.0:
        raise ValueError(
            f"envelope_mass_fraction must be < 1 [1], got {value['envelope_mass_fraction']!r}"
        )
    import pandas as pd

    frame, lines, source = read_archive(archive)
    n = len(frame)
    names = frame["pl_name"].to_numpy(dtype=object)
    hosts = frame["hostname"].to_numpy(dtype=object) if "hostname" in frame else np.full(n, "")

    def column(name: str) -> NDArray[np.float64]:
        return frame[name].to_numpy(dtype=float) if name in frame else np.full(n, np.nan)

    keep = np.ones(n, dtype=bool)
    dropped: list[DroppedNote] = []
    limited: list[LimitNote] = []

    def drop(mask: NDArray[np.bool_], reason: str) -> None:
        for k in np.nonzero(mask & keep)[0]:
            dropped.append(DroppedNote(str(names[k]), int(lines[k]), reason))
        keep[mask] = False

    if "default_flag" in frame:
        flag = column("default_flag")
        drop(flag == 0, "default_flag 0: not the archive's default parameter set")
    si: dict[str, NDArray[np.float64]] = {}
    upper: dict[str, NDArray[np.float64]] = {}
    lower: dict[str, NDArray[np.float64]] = {}
    for archive_name, ours, _, factor in _QUANTITIES:
        v, e1, e2 = (column(archive_name + s) for s in ("", "err1", "err2"))
        lim = column(archive_name + "lim")
        for err, sign, label in ((e1, 1.0, "err1"), (e2, -1.0, "err2")):
            bad = np.nonzero(np.isfinite(err) & (sign * err < 0.0))[0]
            if bad.size:
                k = int(bad[0])
                want = ">= 0 (the upper error)" if sign > 0 else "<= 0 (the lower error)"
                raise ValueError(
                    f"{source} line {lines[k]} column '{archive_name}{label}': must be {want}, "
                    f"got {err[k]!r}"
                )
        positive = factor is not None  # log10 L may be negative; the rest may not
        bad = np.nonzero(np.isfinite(v) & (v <= 0.0) & positive)[0]
        if bad.size:
            k = int(bad[0])
            raise ValueError(
                f"{source} line {lines[k]} column '{archive_name}': must be > 0, got {v[k]!r}"
            )
        bad = np.nonzero(np.isfinite(lim) & ~np.isin(lim, (-1.0, 0.0, 1.0)))[0]
        if bad.size:
            k = int(bad[0])
            raise ValueError(
                f"{source} line {lines[k]} column '{archive_name}lim': a limit flag is -1, 0 or "
                f"1, got {lim[k]!r}"
            )
        # One error without the other: the same width on both sides.
        hi = np.where(np.isfinite(e1), e1, -e2)
        lo = np.where(np.isfinite(e2), -e2, e1)
        limit = np.isfinite(v) & np.isfinite(lim) & (lim != 0.0)
        action = "dropped" if limits == "drop" else "kept with the limit as its value"
        for at in np.nonzero(limit & keep)[0]:
            side = "upper limit" if lim[at] > 0 else "lower limit"
            limited.append(
                LimitNote(str(names[at]), int(lines[at]), archive_name, side, float(v[at]), action)
            )
        if limits == "drop":
            drop(limit, f"{archive_name} is a limit, not a measurement (limits='drop')")
        hi = np.where(limit, np.nan, hi)
        lo = np.where(limit, np.nan, lo)
        if factor is None:  # log10(L/L_sun) -> W; widths in dex -> linear widths
            linear = c.L_SUN * 10.0**v
            si[ours] = linear
            upper[ours] = linear * (10.0**hi - 1.0)
            lower[ours] = linear * (1.0 - 10.0**-lo)
        else:
            si[ours], upper[ours], lower[ours] = v * factor, hi * factor, lo * factor
    for ours, archive_name in (("planet_mass", "pl_bmasse"), ("planet_radius", "pl_rade")):
        drop(~np.isfinite(si[ours]), f"no {archive_name}: the case needs it")
    star = np.all([np.isfinite(si[q]) & (si[q] > 0.0) for q in _STAR], axis=0)
    for q in _STAR:
        si[q] = np.where(star, si[q], np.nan)
    # Equilibrium temperature: the archive's, else from the star.
    computed = (
        si["star_luminosity"] / (16.0 * math.pi * STEFAN_BOLTZMANN * si["semi_major_axis"] ** 2)
    ) ** 0.25
    t_eq_given = np.isfinite(si["equilibrium_temperature"]) & (si["equilibrium_temperature"] > 0)
    t_eq = np.where(t_eq_given, si["equilibrium_temperature"], computed)
    drop(~np.isfinite(t_eq), "no pl_eqt and no star (pl_orbsmax, st_mass, st_lum) to compute it")

    overrides, override_units = _overrides(frame)
    rows = np.nonzero(keep)[0]
    out: dict[str, NDArray[np.float64]] = {}
    for q in ("planet_mass", "planet_radius", *_STAR):
        out[q] = si[q][rows]
        out[q + "_sigma_upper"] = upper[q][rows]
        out[q + "_sigma_lower"] = lower[q][rows]
    out["star_age"] = si["star_age"][rows]  # ages take no uncertainty in a case table
    for q in _STAR:  # no star: no widths either
        for suffix in ("_sigma_upper", "_sigma_lower"):
            out[q + suffix] = np.where(star[rows], out[q + suffix], np.nan)
    mass, radius, t_eq = out["planet_mass"], out["planet_radius"], t_eq[rows]
    rocky = radius < value["radius_valley"]
    species_names = list(dict.fromkeys([*ROCKY_COMPOSITION, *GAS_COMPOSITION]))
    for sp in species_names:
        out["x_" + sp] = np.where(
            rocky, ROCKY_COMPOSITION.get(sp, 0.0), GAS_COMPOSITION.get(sp, 0.0)
        )
    # A composition of the user's replaces the class default for its rows.
    own_x = [q for q in overrides if q.startswith("x_") and _is_value(q)]
    composed = np.zeros(len(rows), dtype=bool)
    for q in own_x:
        composed |= np.isfinite(overrides[q][rows])
    for q in own_x:
        out[q] = np.where(composed, np.nan_to_num(overrides[q][rows]), out.get(q, 0.0))
    for sp in species_names:
        if "x_" + sp not in own_x:
            out["x_" + sp] = np.where(composed, 0.0, out["x_" + sp])
    x_names = [q for q in out if q.startswith("x_") and _is_value(q)]
    mean_mass = np.zeros(len(rows))
    for q in x_names:
        mean_mass += out[q] * _species(q[2:]).mass
    gravity = c.G * mass / radius**2
    out["homopause_altitude"] = (
        value["homopause_scale_heights"] * c.K_B * t_eq / (mean_mass * gravity)
    )
    out["homopause_density"] = np.full(len(rows), value["homopause_density"])
    factor = value["exobase_temperature_factor"]
    out["exobase_temperature"] = factor * t_eq
    out["exobase_temperature_sigma_upper"] = np.where(
        t_eq_given[rows], factor * upper["equilibrium_temperature"][rows], np.nan
    )
    out["exobase_temperature_sigma_lower"] = np.where(
        t_eq_given[rows], factor * lower["equilibrium_temperature"][rows], np.nan
    )
    out["surface_pressure"] = np.where(rocky, value["surface_pressure"], np.nan)
    out["inventory"] = np.where(rocky, np.nan, value["envelope_mass_fraction"] * mass / mean_mass)
    defaulted = {
        q: np.ones(len(rows), dtype=bool)
        for q in ("homopause_altitude", "homopause_density", "exobase_temperature")
    }
    defaulted["surface_pressure"] = rocky.copy()
    defaulted["inventory"] = ~rocky
    defaulted["x_"] = ~composed
    # The user's own columns win wherever their cells are given, and clear what they replace.
    for q, values in overrides.items():
        if q.startswith("x_") and _is_value(q):
            continue
        given = np.isfinite(values[rows])
        base = width_column(q)[1]
        if q in out and _is_value(q):
            # The user's value replaces ours, and our widths of it with it.
            for suffix in ("_sigma_upper", "_sigma_lower"):
                if base + suffix in out and base + suffix not in overrides:
                    out[base + suffix] = np.where(given, np.nan, out[base + suffix])
        out[q] = np.where(given, values[rows], out.get(q, np.full(len(rows), np.nan)))
        if q in defaulted:
            defaulted[q] &= ~given
        for cleared in _CLEARS.get(q, ()):
            out[cleared] = np.where(given, np.nan, out[cleared])
            for suffix in ("_sigma_upper", "_sigma_lower"):
                if cleared + suffix in out:
                    out[cleared + suffix] = np.where(given, np.nan, out[cleared + suffix])
            defaulted[cleared] &= ~given
    cases = pd.DataFrame({"case": names[rows], "star": hosts[rows]})
    for q, values in out.items():
        kind, base = width_column(q)
        if q.startswith("x_") and kind is None:
            cases[q] = values  # mole fractions [1], no unit in the header
            continue
        if not np.isfinite(values).any():
            continue  # a column no row gives
        unit = (
            "1"
            if kind == "lnsigma"
            else override_units.get(q) or _DISPLAY.get(base) or _si_unit(q) or "1"
        )
        cases[f"{q} [{unit}]"] = values / unit_factor(q, unit)
    valley = value["radius_valley"] / c.R_EARTH
    cases["comment"] = np.where(
        rocky,
        f"rocky (radius below {valley:g} R_earth): secondary atmosphere",
        f"gas-rich (radius at or above {valley:g} R_earth): solar H2/He",
    )
    cases.loc[composed, "comment"] = "composition from the archive table's x_ columns"
    planets = names[rows]
    rules = {
        "exobase_temperature": f"{factor:g} x T_eq (T_eq: pl_eqt, else from the star)",
        "homopause_altitude": f"{value['homopause_scale_heights']:g} scale heights k T_eq/(m g)",
        "homopause_density": f"{value['homopause_density']:g} m-3",
        "surface_pressure": f"{value['surface_pressure'] / 1e5:g} bar (rocky)",
        "inventory": f"{value['envelope_mass_fraction']:g} of the planet mass as H2/He (gas-rich)",
        "x_": "by class: rocky N2/CO2/H2O 0.8/0.1/0.1; gas-rich solar H2/He",
    }
    defaults = [
        DefaultNote(q, rules[q], [str(p) for p in planets[mask]])
        for q, mask in defaulted.items()
        if mask.any()
    ]
    computed_rows = keep & ~t_eq_given
    if computed_rows.any():
        defaults.append(
            DefaultNote(
                "exobase_temperature",
                "T_eq computed from the star: (L / (16 pi sigma a^2))^(1/4), zero albedo",
                [str(p) for p in names[computed_rows]],
            )
        )
    no_age = keep & ~np.isfinite(si["star_age"])
    if no_age.any():
        defaults.append(
            DefaultNote(
                "star_age",
                "left empty: the run ends at the sweep's end age",
                [str(p) for p in names[no_age]],
            )
        )
    no_star = keep & ~star
    if no_star.any():
        defaults.append(
            DefaultNote(
                "semi_major_axis",
                "left empty: no star (pl_orbsmax, st_mass and st_lum are needed together)",
                [str(p) for p in names[no_star]],
            )
        )
    return ArchiveCases(cases.reset_index(drop=True), limited, dropped, defaults, source)


def _is_value(name: str) -> bool:
    """Whether case-table column `name` holds a value (not a width)."""
    return width_column(name)[0] is None


def _overrides(frame: Any) -> tuple[dict[str, NDArray[np.float64]], dict[str, str]]:
    """Case-table columns the archive table carries (``quantity [unit]`` headers): their SI
    values and the units they were given in."""
    out: dict[str, NDArray[np.float64]] = {}
    units: dict[str, str] = {}
    for header in frame.columns:
        match = _HEADER.match(str(header))
        if match is None:
            continue
        name, unit = match.group(1), match.group(2)
        expected = _si_unit(name)
        if expected is None or name in ("pl_name", "hostname"):
            continue
        if unit is None:
            if not (name.startswith("x_") or name.endswith("_lnsigma")):
                continue
            unit = "1"
        try:
            factor = unit_factor(name, unit)
        except ValueError as err:
            raise ValueError(f"archive column '{header}': {err}") from None
        if name.startswith("x_") and _is_value(name):
            _species(name[2:])  # unknown species: ValueError with the closest names
        out[name] = np.asarray(frame[header], dtype=float) * factor
        units[name] = unit
    return out, units
