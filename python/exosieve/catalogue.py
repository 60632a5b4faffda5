"""Planet case tables: CSV files whose column headers name their units.

A header reads ``quantity [unit]`` (for example ``planet_mass [M_earth]``); ``_sigma`` columns
hold one-standard-deviation uncertainties in the same unit; ``x_<species>`` columns are mole
fractions [1]. Lines starting with ``#`` are comments. Values are converted to SI on reading.
"""

from __future__ import annotations

import csv
import math
import re
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

from . import constants as c
from .species import species as _species

#: Units accepted in column headers and their SI factors.
UNITS: dict[str, float] = {
    "kg": 1.0,
    "M_earth": c.M_EARTH,
    "M_jupiter": c.M_JUPITER,
    "M_sun": c.M_SUN,
    "m": 1.0,
    "km": 1e3,
    "R_earth": c.R_EARTH,
    "R_jupiter": c.R_JUPITER,
    "au": c.AU,
    "W": 1.0,
    "L_sun": c.L_SUN,
    "K": 1.0,
    "s": 1.0,
    "yr": c.YEAR,
    "Myr": c.MYR,
    "Gyr": c.GYR,
    "m-3": 1.0,
    "cm-3": 1e6,
    "1": 1.0,
}

_HEADER = re.compile(r"^\s*([A-Za-z0-9_]+)\s*(?:\[\s*([^\]]+?)\s*\])?\s*$")


@dataclass
class CaseTable:
    """Rows of a case table in SI units.

    Attributes
    ----------
    names : list of str
        Case labels (the ``case`` column).
    columns : dict of str to list of float
        SI values per quantity (``planet_mass`` [kg], ``exobase_altitude`` [m], ...).
    text_columns : dict of str to list of str
        Columns that hold text (``case``, ``star``).
    species : list of str
        Species named by ``x_<species>`` columns, in column order.
    source : str
        Where the table came from.
    """

    names: list[str]
    columns: dict[str, list[float]] = field(default_factory=dict)
    text_columns: dict[str, list[str]] = field(default_factory=dict)
    species: list[str] = field(default_factory=list)
    source: str = ""

    def column(self, name: str) -> list[float]:
        """SI values of quantity ``name``; ValueError naming the table when it is missing."""
        if name not in self.columns:
            raise ValueError(f"{self.source}: no column '{name}' (have {sorted(self.columns)})")
        return self.columns[name]

    def mole_fractions(self, row: int) -> dict[str, float]:
        """Non-zero mole fractions of case ``row`` [1]."""
        return {s: self.columns[f"x_{s}"][row] for s in self.species if self.columns[f"x_{s}"][row]}


def demo_catalogue_path() -> Path:
    """Path of the invented demo catalogue shipped with the package."""
    packaged = resources.files("exosieve") / "data" / "demo_planets.csv"
    if packaged.is_file():
        return Path(str(packaged))
    return Path(__file__).resolve().parents[2] / "data" / "demo_planets.csv"


def read_case_table(path: str | Path) -> CaseTable:
    """Read a case table from CSV, converting every column to SI.

    Raises ValueError naming the line and column of the first malformed entry.

    Examples
    --------
    >>> table = read_case_table(demo_catalogue_path())
    >>> table.names[0], round(table.column("planet_mass")[0] / 5.9722e24, 2)
    ('Ithrel b', 0.62)
    """
    path = Path(path)
    source = str(path)
    with path.open(newline="", encoding="utf-8") as handle:
        lines = [(n, line) for n, line in enumerate(handle, start=1)]
    rows = [
        (n, r)
        for n, r in ((n, next(csv.reader([line]), [])) for n, line in lines)
        if r and not r[0].lstrip().startswith("#")
    ]
    if not rows:
        raise ValueError(f"{source}: no header line")
    header_line, header = rows[0]
    parsed: list[tuple[str, str | None]] = []
    for number, text in enumerate(header, start=1):
        match = _HEADER.match(text)
        if not match:
            raise ValueError(
                f"{source} line {header_line} column {number}: cannot read header "
                f"'{text}' (expected 'quantity [unit]')"
            )
        name, unit = match.group(1), match.group(2)
        if unit is not None and unit not in UNITS:
            raise ValueError(
                f"{source} line {header_line} column '{text}': unknown unit "
                f"'{unit}' (known: {', '.join(UNITS)})"
            )
        parsed.append((name, unit))
    if parsed[0][0] != "case":
        raise ValueError(f"{source} line {header_line}: the first column must be 'case'")
    table = CaseTable(names=[], source=source)
    for name, unit in parsed:
        if name in ("case", "star"):
            table.text_columns[name] = []
        else:
            if unit is None and not name.startswith("x_"):
                raise ValueError(
                    f"{source} line {header_line} column '{name}': the header must "
                    "name a unit, e.g. '{name} [K]'"
                )
            table.columns[name] = []
        if name.startswith("x_"):
            _species(name[2:])  # unknown species: ValueError with the closest names
            table.species.append(name[2:])
    for line, row in rows[1:]:
        if len(row) != len(parsed):
            raise ValueError(
                f"{source} line {line}: {len(row)} fields, the header has {len(parsed)}"
            )
        for (name, unit), text in zip(parsed, row, strict=True):
            if name in table.text_columns:
                table.text_columns[name].append(text.strip())
                continue
            try:
                value = float(text)
            except ValueError:
                raise ValueError(
                    f"{source} line {line} column '{name}': '{text}' is not a number"
                ) from None
            if not math.isfinite(value):
                raise ValueError(
                    f"{source} line {line} column '{name}': value {text} is not finite"
                )
            table.columns[name].append(value * UNITS[unit or "1"])
    table.names = table.text_columns["case"]
    return table
