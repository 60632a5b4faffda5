"""Planet case tables: CSV files (or pandas DataFrames) whose column headers name their units.

A header reads ``quantity [unit]`` (for example ``planet_mass [M_earth]``); ``_sigma`` columns
hold one-standard-deviation uncertainties in the same unit (normal distribution),
``_lnsigma [1]`` columns the standard deviation of the natural logarithm (log-normal, the value
being the median); ``x_<species>`` columns are mole fractions [1]. Lines starting with ``#``
are comments; an empty cell means "not given" for that row. Values are converted to SI on
reading. The quantities a case may carry are listed by :func:`case_columns` and in the README.
"""

from __future__ import annotations

import csv
import hashlib
import re
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import _core
from . import constants as c
from .species import species as _species

#: Units accepted in column headers: SI factor and the SI unit they measure.
UNITS: dict[str, tuple[float, str]] = {
    "kg": (1.0, "kg"),
    "M_earth": (c.M_EARTH, "kg"),
    "M_jupiter": (c.M_JUPITER, "kg"),
    "M_sun": (c.M_SUN, "kg"),
    "m": (1.0, "m"),
    "km": (1e3, "m"),
    "R_earth": (c.R_EARTH, "m"),
    "R_jupiter": (c.R_JUPITER, "m"),
    "au": (c.AU, "m"),
    "W": (1.0, "W"),
    "L_sun": (c.L_SUN, "W"),
    "W m-2": (1.0, "W m-2"),
    "erg s-1 cm-2": (1e-3, "W m-2"),
    "K": (1.0, "K"),
    "s": (1.0, "s"),
    "yr": (c.YEAR, "s"),
    "Myr": (c.MYR, "s"),
    "Gyr": (c.GYR, "s"),
    "m-3": (1.0, "m-3"),
    "cm-3": (1e6, "m-3"),
    "Pa": (1.0, "Pa"),
    "bar": (1e5, "Pa"),
    "particles": (1.0, "particles"),
    "mol": (c.N_A, "particles"),
    "1": (1.0, "1"),
}

#: Columns that hold text rather than numbers.
TEXT_COLUMNS = ("case", "star", "density_scaling", "comment")

_HEADER = re.compile(r"^\s*([A-Za-z0-9_]+)\s*(?:\[\s*([^\]]+?)\s*\])?\s*$")


def _si_unit(quantity: str) -> str | None:
    """SI unit of a case quantity (or of the value behind a _sigma column); None if unknown."""
    base = quantity[: -len("_sigma")] if quantity.endswith("_sigma") else quantity
    if base.startswith("x_") or quantity.endswith("_lnsigma"):
        return "1"
    if base.startswith("inventory_"):
        return "particles"
    for name, unit, *_ in _core.case_parameters():
        if name == base:
            return str(unit)
    return None


def case_columns() -> list[tuple[str, str, str, bool, bool]]:
    """The quantities a case table may hold.

    Returns
    -------
    list of (name, SI unit, meaning, required, may have an uncertainty)
        Besides these: ``case`` (label, first column), ``star``, ``comment`` (text, ignored),
        ``density_scaling`` (``inventory`` or ``fixed``), ``x_<species>`` mole fractions at the
        exobase [1] (summing to 1 within 1e-3) and ``inventory_<species>`` initial inventories
        [particles].

    Examples
    --------
    >>> [row[:2] for row in case_columns()][:2]
    [('planet_mass', 'kg'), ('planet_radius', 'm')]
    """
    return [tuple(row) for row in _core.case_parameters()]


@dataclass
class CaseTable:
    """Rows of a case table in SI units.

    Attributes
    ----------
    names : list of str
        Case labels (the ``case`` column).
    columns : dict of str to ndarray
        SI values per quantity (``planet_mass`` [kg], ``exobase_altitude`` [m], ...); NaN where
        a row gives no value.
    text_columns : dict of str to list of str
        Columns that hold text (``case``, ``star``, ``density_scaling``, ``comment``).
    species : list of str
        Species named by ``x_<species>`` columns, in column order.
    source : str
        Where the table came from.
    row_labels : list of str
        Where each row comes from, for messages ("line 7" of a file, "row 3" of a DataFrame).
    row_errors : list of str
        Per row: why it could not be read ("" when it could); filled when reading with
        ``errors="collect"``.
    """

    names: list[str]
    columns: dict[str, NDArray[np.float64]] = field(default_factory=dict)
    text_columns: dict[str, list[str]] = field(default_factory=dict)
    species: list[str] = field(default_factory=list)
    source: str = ""
    row_labels: list[str] = field(default_factory=list)
    row_errors: list[str] = field(default_factory=list)

    def __len__(self) -> int:
        return len(self.names)

    def column(self, name: str) -> NDArray[np.float64]:
        """SI values of quantity ``name``; ValueError naming the table when it is missing."""
        if name not in self.columns:
            raise ValueError(f"{self.source}: no column '{name}' (have {sorted(self.columns)})")
        return self.columns[name]

    def fingerprint(self) -> str:
        """SHA-256 of the table's content in SI (names, columns and text), for resuming runs."""
        digest = hashlib.sha256()
        digest.update("\0".join(self.names).encode() + b"\1")
        for name in sorted(self.columns):
            digest.update(name.encode() + b"\0")
            digest.update(np.asarray(self.columns[name], dtype="<f8").tobytes())
        for name in sorted(self.text_columns):
            digest.update(name.encode() + b"\0" + "\0".join(self.text_columns[name]).encode())
        digest.update("\0".join(self.row_errors).encode())
        return digest.hexdigest()

    def to_core(self, first_key: int = 0, rows: slice | None = None) -> Any:
        """The rows ``rows`` (default all) as the compiled core's table; row ``i`` gets key
        ``first_key + i``."""
        rows = rows if rows is not None else slice(0, len(self.names))
        table = _core.CaseTable()
        table.names = self.names[rows]
        table.row_labels = self.row_labels[rows] if self.row_labels else []
        table.row_errors = self.row_errors[rows] if any(self.row_errors) else []
        table.first_key = first_key
        for name, values in self.columns.items():
            table.add_column(name, np.ascontiguousarray(values[rows], dtype=float))
        for name, texts in self.text_columns.items():
            if name != "case":
                table.add_text(name, texts[rows])
        return table


def demo_catalogue_path() -> Path:
    """Path of the invented demo catalogue shipped with the package."""
    return _data_path("demo_planets.csv")


def case_table_template_path() -> Path:
    """Path of the documented case-table template shipped with the package."""
    return _data_path("case_table_template.csv")


def _data_path(name: str) -> Path:
    packaged = resources.files("exosieve") / "data" / name
    if packaged.is_file():
        return Path(str(packaged))
    return Path(__file__).resolve().parents[2] / "data" / name


class _Reader:
    """Turns headers and rows of text or numbers into a CaseTable, one rule set for both."""

    def __init__(self, source: str, header: list[str], header_where: str, collect: bool):
        self.collect = collect
        self.source = source
        self.parsed: list[tuple[str, str | None]] = []
        for number, text in enumerate(header, start=1):
            match = _HEADER.match(str(text))
            if not match:
                raise ValueError(
                    f"{source} {header_where} column {number}: cannot read header "
                    f"'{text}' (expected 'quantity [unit]')"
                )
            name, unit = match.group(1), match.group(2)
            self._check_unit(name, unit, text, header_where)
            self.parsed.append((name, unit))
        if not self.parsed or self.parsed[0][0] != "case":
            raise ValueError(f"{source} {header_where}: the first column must be 'case'")
        seen: set[str] = set()
        for name, _ in self.parsed:
            if name in seen:
                raise ValueError(f"{source} {header_where}: column '{name}' appears twice")
            seen.add(name)
        self.table = CaseTable(names=[], source=source)
        for name, _ in self.parsed:
            if name in TEXT_COLUMNS:
                self.table.text_columns[name] = []
            else:
                self.table.columns[name] = np.zeros(0)
            if name.startswith("x_") and not name.endswith(("_sigma", "_lnsigma")):
                try:
                    _species(name[2:])  # unknown species: ValueError with the closest names
                except ValueError as err:
                    raise ValueError(f"{source} {header_where} column '{name}': {err}") from None
                self.table.species.append(name[2:])

    def _check_unit(self, name: str, unit: str | None, text: str, where: str) -> None:
        if name in TEXT_COLUMNS:
            return
        if unit is None:
            if name.startswith("x_") or name.endswith("_lnsigma"):
                return
            raise ValueError(
                f"{self.source} {where} column '{name}': the header must name a unit, "
                f"e.g. '{name} [K]'"
            )
        if unit not in UNITS:
            raise ValueError(
                f"{self.source} {where} column '{text}': unknown unit '{unit}' "
                f"(known: {', '.join(UNITS)})"
            )
        expected = _si_unit(name)
        if expected is not None and UNITS[unit][1] != expected:
            raise ValueError(
                f"{self.source} {where} column '{text}': unit '{unit}' does not measure "
                f"{name} (which is in {expected})"
            )

    def read(self, labels: list[str], cells: list[Any], widths: list[int] | None = None) -> None:
        """Convert whole columns at once: `cells[k]` holds column k's raw values, one per row;
        `widths` (CSV) the number of fields each row had."""
        table = self.table
        n = len(labels)
        errors: dict[int, str] = {}
        if widths is not None:
            for i, width in enumerate(widths):
                if width != len(self.parsed):
                    errors[i] = (
                        f"{self.source} {labels[i]}: {width} fields, the header has "
                        f"{len(self.parsed)}"
                    )
        for (name, unit), column in zip(self.parsed, cells, strict=True):
            raw = np.asarray(column, dtype=object) if not _is_float_array(column) else column
            if name in table.text_columns:
                # Texts as given, unless a cell is missing (not text, or the text "nan").
                stripped = [value.strip() for value in raw if type(value) is str]
                missing = len(stripped) != len(raw)
                if not missing:  # one joined search instead of a comparison per cell
                    missing = "\0nan\0" in ("\0" + "\0".join(stripped) + "\0").lower()
                if missing:
                    stripped = [
                        value.strip()
                        if type(value) is str and value.strip().lower() != "nan"
                        else ("" if _is_missing(value) else str(value).strip())
                        for value in raw
                    ]
                table.text_columns[name] = stripped
                continue
            values, bad = _numbers(raw)
            for i, value in bad.items():
                if i not in errors:
                    what = "is not finite" if isinstance(value, float) else "is not a number"
                    shown = f"value {value}" if isinstance(value, float) else f"'{value}'"
                    errors[i] = f"{self.source} {labels[i]} column '{name}': {shown} {what}"
            table.columns[name] = values * UNITS[unit or "1"][0]
        table.row_labels = list(labels)
        table.row_errors = [errors.get(i, "") for i in range(n)] if errors else [""] * n
        if errors and not self.collect:
            raise ValueError(errors[min(errors)])

    def finish(self) -> CaseTable:
        self.table.names = self.table.text_columns["case"]
        return self.table


def _is_float_array(column: Any) -> bool:
    return isinstance(column, np.ndarray) and column.dtype.kind in "fiu"


def _numbers(raw: Any) -> tuple[NDArray[np.float64], dict[int, Any]]:
    """Float64 values of a column (NaN where empty) and the rows that are not finite numbers."""
    if _is_float_array(raw):
        values = raw.astype(float)
    else:
        text = np.array(["nan" if _is_missing(v) else v for v in raw], dtype=object)
        try:
            values = text.astype(float)
        except (TypeError, ValueError):
            values = np.full(len(text), np.nan)
            bad: dict[int, Any] = {}
            for i, value in enumerate(text):
                try:
                    values[i] = float(value)
                except (TypeError, ValueError):
                    bad[i] = value
            for k in np.nonzero(np.isinf(values))[0]:
                bad[int(k)] = float(values[k])
                values[k] = np.nan
            return values, bad
    infinite = np.nonzero(np.isinf(values))[0]
    bad = {int(i): float(values[i]) for i in infinite}
    values[infinite] = np.nan
    return values, bad


def _is_missing(value: Any) -> bool:
    if value is None:
        return True
    if isinstance(value, str):
        return value.strip() == "" or value.strip().lower() == "nan"
    try:
        return bool(np.isnan(value))
    except (TypeError, ValueError):
        return False


def read_case_table(path: str | Path, errors: str = "raise") -> CaseTable:
    """Read a case table from CSV, converting every column to SI.

    Parameters
    ----------
    path : str or Path
        The CSV file.
    errors : {"raise", "collect"}
        ``"raise"``: ValueError naming the line and column of the first malformed entry.
        ``"collect"``: keep reading and record each malformed row's error in ``row_errors``
        (malformed headers always raise).

    Examples
    --------
    >>> table = read_case_table(demo_catalogue_path())
    >>> table.names[0], round(float(table.column("planet_mass")[0]) / 5.9722e24, 2)
    ('Ithrel b', 0.62)
    """
    _check_errors(errors)
    path = Path(path)
    source = str(path)
    with path.open(newline="", encoding="utf-8") as handle:
        lines = list(enumerate(handle, start=1))
    rows = [
        (n, r)
        for n, r in ((n, next(csv.reader([line]), [])) for n, line in lines)
        if r and not r[0].lstrip().startswith("#")
    ]
    if not rows:
        raise ValueError(f"{source}: no header line")
    header_line, header = rows[0]
    reader = _Reader(source, header, f"line {header_line}", errors == "collect")
    width = len(header)
    body = rows[1:]
    padded = [(list(row) + [""] * width)[:width] for _, row in body]
    cells = [list(column) for column in zip(*padded, strict=True)] if padded else [[]] * width
    reader.read([f"line {line}" for line, _ in body], cells, [len(row) for _, row in body])
    return reader.finish()


def case_table_from_frame(
    frame: Any, source: str = "DataFrame", errors: str = "raise"
) -> CaseTable:
    """Read a case table from a pandas DataFrame whose column names are ``quantity [unit]``.

    The same rules as :func:`read_case_table`; rows are named by their index label. An index
    named ``case`` serves as the ``case`` column.

    Examples
    --------
    >>> import pandas as pd
    >>> from exosieve.constants import M_EARTH
    >>> frame = pd.DataFrame({"case": ["A"], "planet_mass [M_earth]": [2.0], "x_N2": [1.0]})
    >>> float(case_table_from_frame(frame).column("planet_mass")[0] / M_EARTH)
    2.0
    """
    _check_errors(errors)
    if "case" not in frame.columns and frame.index.name == "case":
        frame = frame.reset_index()  # case labels kept as the index
    reader = _Reader(source, [str(name) for name in frame.columns], "header", errors == "collect")
    reader.read(
        [f"row {label}" for label in frame.index],
        [frame[name].to_numpy() for name in frame.columns],
    )
    return reader.finish()


def load_cases(cases: Any, errors: str = "raise") -> CaseTable:
    """A :class:`CaseTable` from a CSV path, a pandas DataFrame or a CaseTable."""
    if isinstance(cases, CaseTable):
        return cases
    if isinstance(cases, (str, Path)):
        return read_case_table(cases, errors=errors)
    if hasattr(cases, "columns") and hasattr(cases, "index"):
        return case_table_from_frame(cases, errors=errors)
    raise ValueError(
        f"cases must be a CSV path, a pandas DataFrame or a CaseTable, got {type(cases).__name__}"
    )


def _check_errors(errors: str) -> None:
    if errors not in ("raise", "collect"):
        raise ValueError(f"errors must be 'raise' or 'collect', got {errors!r}")
