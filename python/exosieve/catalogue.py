"""Planet case tables: CSV files (or pandas DataFrames) whose column headers name their units.

A header reads ``quantity [unit]`` (for example ``planet_mass [M_earth]``); ``_sigma`` columns
hold one-standard-deviation uncertainties in the same unit (normal distribution),
``_lnsigma [1]`` columns the standard deviation of the natural logarithm (log-normal, the value
being the median), and a pair ``_sigma_upper``/``_sigma_lower`` the widths above and below the
value in its unit (split normal, the value being the mode: asymmetric errors such as +0.3/-0.1);
``x_<species>`` columns are mole fractions [1]. Files are CSV as RFC 4180
describes it (UTF-8, a byte-order mark allowed): a double-quoted field is data, whatever it
holds (commas, ``#``, line breaks); a line whose first character is ``#`` outside any quoted
field is a comment. An empty cell means "not given" for that row. Values are converted to SI
on reading. The quantities a case may carry are listed by :func:`case_columns` and in the README.
"""

from __future__ import annotations

import csv
import hashlib
import os
import re
import sys
from collections.abc import Sequence
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any, overload

import numpy as np
from numpy.typing import NDArray

from . import _core, _units
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
    "s-1": (1.0, "s-1"),
    "yr": (c.YEAR, "s"),
    "Myr": (c.MYR, "s"),
    "Gyr": (c.GYR, "s"),
    "m-1": (1.0, "m-1"),
    "km-1": (1e-3, "m-1"),
    "m-3": (1.0, "m-3"),
    "cm-3": (1e6, "m-3"),
    "m2": (1.0, "m2"),
    "cm2": (1e-4, "m2"),
    "m-1 s-1": (1.0, "m-1 s-1"),
    "cm-1 s-1": (1e2, "m-1 s-1"),
    "m3 s-1": (1.0, "m3 s-1"),
    "cm3 s-1": (1e-6, "m3 s-1"),
    "J": (1.0, "J"),
    "eV": (float(_core.ELECTRON_VOLT), "J"),
    "u": (c.AMU, "kg"),
    "Pa": (1.0, "Pa"),
    "bar": (1e5, "Pa"),
    "particles": (1.0, "particles"),
    "mol": (c.N_A, "particles"),
    "1": (1.0, "1"),
}

#: Per-species column prefixes (``x_``, ``inventory_``, ...) and their SI units.
_SPECIES_UNITS: list[tuple[str, str]] = [
    (str(row[0]).removesuffix("<species>"), str(row[1])) for row in _core.species_parameters()
]

#: Columns that hold text rather than numbers (the core's list, ``case`` first).
TEXT_COLUMNS: tuple[str, ...] = tuple(str(row[0]) for row in _core.case_text_columns())

#: Longest text accepted in a cell [characters].
MAX_TEXT_LENGTH = 10_000

#: Rows converted at a time when reading a CSV file: bounds the memory of the raw text.
_BLOCK_ROWS = 4096

_CONTROL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")

_HEADER = re.compile(r"^\s*([A-Za-z0-9_]+)\s*(?:\[\s*([^\]]+?)\s*\])?\s*$")


def _si_unit(quantity: str) -> str | None:
    """SI unit of a case quantity (or of the value behind a width column); None if unknown."""
    kind, base = width_column(quantity)
    if kind == "lnsigma":
        return "1"
    for name, unit, *_ in _core.case_parameters():
        if name == base:
            return str(unit)
    # Per species: the longest prefix that matches (given_loss_exponent_H is an exponent).
    matches = [(len(prefix), unit) for prefix, unit in _SPECIES_UNITS if base.startswith(prefix)]
    return max(matches)[1] if matches else None


#: Suffixes of the width (uncertainty) columns, longest first, and the kind each names.
WIDTH_SUFFIXES: tuple[tuple[str, str], ...] = (
    ("_sigma_upper", "sigma_upper"),
    ("_sigma_lower", "sigma_lower"),
    ("_lnsigma", "lnsigma"),
    ("_sigma", "sigma"),
)


def width_column(name: str) -> tuple[str | None, str]:
    """The kind of width column ``name`` is (``"sigma"``, ``"lnsigma"``, ``"sigma_upper"``,
    ``"sigma_lower"``, or None for a value column) and the quantity it belongs to.

    Examples
    --------
    >>> width_column("planet_mass_sigma_upper"), width_column("x_He")
    (('sigma_upper', 'planet_mass'), (None, 'x_He'))
    """
    for suffix, kind in WIDTH_SUFFIXES:
        if name.endswith(suffix) and len(name) > len(suffix):
            return kind, name[: -len(suffix)]
    return None, name


def species_columns() -> list[tuple[str, str, str, bool, bool]]:
    """The per-species quantities, one column ``<prefix><species>`` per species of the table.

    Returns
    -------
    list of (name as ``<prefix><species>``, SI unit, meaning, required, may have an uncertainty)

    Examples
    --------
    >>> [row[:2] for row in species_columns()][:3]
    [('x_<species>', '1'), ('inventory_<species>', 'particles'), ('given_loss_<species>', 's-1')]
    """
    return [tuple(row) for row in _core.species_parameters()]


def column_groups() -> list[tuple[str, list[str]]]:
    """The quantities of :func:`case_columns` and :func:`species_columns` grouped by what they
    describe, in documentation order: (heading, names).

    Examples
    --------
    >>> dict(column_groups())["span and solver"]
    ['age_start', 'age_end', 'star_age', 'rtol', 'max_steps']
    """
    names = [row[0] for row in _core.case_parameters()]
    groups = _core.case_parameter_groups()
    starts = [names.index(first) for _, first, _ in groups] + [len(names)]
    return [
        (heading, names[starts[k] : starts[k + 1]] + list(per_species))
        for k, (heading, _, per_species) in enumerate(groups)
    ]


def text_columns() -> list[tuple[str, str]]:
    """The text columns a case table may hold, ``case`` first: (name, meaning).

    Examples
    --------
    >>> [name for name, _ in text_columns()][:3]
    ['case', 'star', 'density_scaling']
    """
    return [(str(name), str(meaning)) for name, meaning in _core.case_text_columns()]


def case_columns() -> list[tuple[str, str, str, bool, bool]]:
    """The quantities a case table may hold.

    Returns
    -------
    list of (name, SI unit, meaning, required, may have an uncertainty)
        An uncertainty is a column ``<name>_sigma`` (normal, in the unit of the value),
        ``<name>_lnsigma [1]`` (log-normal) or the pair ``<name>_sigma_upper``,
        ``<name>_sigma_lower`` (split normal, widths above and below the value).
        Besides these: the text columns of :func:`text_columns` and the per-species columns
        of :func:`species_columns`: ``x_<species>`` bulk (well-mixed) mole fractions [1]
        (summing to 1 within 1e-3; the shares of the inventory), ``exobase_x_<species>`` the
        composition of a prescribed exobase [1], ``inventory_<species>`` initial inventories
        [particles], ``given_loss_<species>`` given losses [s-1],
        ``given_loss_exponent_<species>`` [1] and the drag laws ``drag_diffusion_<species>``
        [m-1 s-1], ``drag_diffusion_exponent_<species>`` [1].

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
        Columns that hold text (:data:`TEXT_COLUMNS`).
    species : list of str
        Species named by ``x_<species>`` columns, in column order.
    source : str
        Where the table came from.
    row_labels : sequence of str
        Where each row comes from, for messages ("line 7" of a file, "row 3" of a DataFrame);
        for a file, a :class:`LineLabels`.
    row_errors : list of str
        Per row: why it could not be read ("" when it could); filled when reading with
        ``errors="collect"``.
    units : dict of str to str
        The unit each numeric column was given in (its header's ``[unit]``), so that messages
        show a bad value as the table gave it.
    """

    names: list[str]
    columns: dict[str, NDArray[np.float64]] = field(default_factory=dict)
    text_columns: dict[str, list[str]] = field(default_factory=dict)
    species: list[str] = field(default_factory=list)
    source: str = ""
    row_labels: Sequence[str] = field(default_factory=list)
    row_errors: list[str] = field(default_factory=list)
    units: dict[str, str] = field(default_factory=dict)

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
        for name, unit in given_units(self.units).items():
            table.set_given_unit(name, unit, unit_factor(name, unit))
        for name, texts in self.text_columns.items():
            if name != "case":
                table.add_text(name, texts[rows])
        return table


class LineLabels(Sequence[str]):
    """Row labels ``"line N"`` of a CSV table, held as line numbers (8 bytes a row).

    Examples
    --------
    >>> labels = LineLabels(np.array([3, 5, 9]))
    >>> labels[1], labels[1:]
    ('line 5', ['line 5', 'line 9'])
    """

    def __init__(self, lines: NDArray[np.int64]):
        self.lines = np.asarray(lines, dtype=np.int64)

    def __len__(self) -> int:
        return len(self.lines)

    @overload
    def __getitem__(self, index: int) -> str: ...
    @overload
    def __getitem__(self, index: slice) -> list[str]: ...
    def __getitem__(self, index: int | slice) -> str | list[str]:
        if isinstance(index, slice):
            return [f"line {n}" for n in self.lines[index].tolist()]
        return f"line {int(self.lines[index])}"

    def __eq__(self, other: object) -> bool:
        if isinstance(other, Sequence):
            return len(other) == len(self) and list(other) == self[:]
        return NotImplemented

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        return f"LineLabels({self.lines!r})"


def given_units(units: dict[str, str]) -> dict[str, str]:
    """The columns of `units` given in a unit other than SI (the ones messages convert)."""
    return {name: unit for name, unit in units.items() if unit_factor(name, unit) != 1.0}


def unit_factor(name: str, unit: str) -> float:
    """The factor taking column `name`'s values in `unit` to its SI unit (:func:`_si_unit`).

    A word of :data:`UNITS` that measures the column takes its factor there; any other unit is
    read by astropy (``Mearth``, ``g cm-3``, ``erg / (s cm2)``, ``1e17 m-3``) and converted
    with astropy's own constants. ValueError, without the column's source, when the unit is
    unknown (astropy's closest names), measures something else, or needs astropy and it is
    not installed.

    Examples
    --------
    >>> unit_factor("exobase_altitude", "km")
    1000.0
    >>> unit_factor("planet_mass", "K")
    Traceback (most recent call last):
    ...
    ValueError: unit 'K' does not measure planet_mass (which is in kg)
    """
    expected = _si_unit(name)
    mismatch = f"unit '{unit}' does not measure {name} (which is in {expected})"
    known = UNITS.get(unit)
    if known is not None:
        if expected is None or known[1] == expected:
            return known[0]
        raise ValueError(mismatch)
    try:
        return _units.factor(unit, expected)
    except _units.UnknownUnit as err:
        raise ValueError(
            f"unknown unit '{unit}': {err} (built-in words: {', '.join(UNITS)}; or any unit "
            "astropy reads)"
        ) from None
    except _units.WrongDimension as err:
        raise ValueError(mismatch + (f"; {err}" if str(err) else "")) from None


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

    def __init__(
        self, source: str, header: list[str], header_where: str, collect: bool, capacity: int
    ):
        self.collect = collect
        self.source = source
        self.parsed: list[tuple[str, str | None]] = []
        self.factors: dict[str, float] = {}  # to SI, by numeric column
        for number, text in enumerate(header, start=1):
            text = str(text)
            if number == 1:
                text = text.removeprefix("\ufeff")  # a byte-order mark read as text
            match = _HEADER.match(text)
            if not match:
                raise ValueError(
                    f"{source} {header_where} column {number}: cannot read header "
                    f"{_shown(text)} (expected 'quantity [unit]')"
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
        self.rows = 0  # rows read so far
        self.labels: list[Sequence[str]] = []  # by block
        self.errors: dict[int, str] = {}  # by row
        self.numbers: dict[str, _Column] = {}
        self.texts: dict[str, dict[str, str]] = {}  # one copy of each repeated text, by column
        for name, unit in self.parsed:
            if name in TEXT_COLUMNS:
                self.table.text_columns[name] = []
                self.texts[name] = {}
            else:
                self.numbers[name] = _Column(capacity)
                self.table.units[name] = unit or "1"
            if name.startswith("x_") and width_column(name)[0] is None:
                try:
                    _species(name[2:])  # unknown species: ValueError with the closest names
                except ValueError as err:
                    raise ValueError(f"{source} {header_where} column '{name}': {err}") from None
                self.table.species.append(name[2:])

    def _check_unit(self, name: str, unit: str | None, text: str, where: str) -> None:
        if name in TEXT_COLUMNS:
            return
        if unit is None:
            if name.startswith(("x_", "exobase_x_")) or name.endswith("_lnsigma"):
                self.factors[name] = UNITS["1"][0]
                return
            raise ValueError(
                f"{self.source} {where} column '{name}': the header must name a unit, "
                f"e.g. '{name} [K]'"
            )
        try:
            self.factors[name] = unit_factor(name, unit)
        except ValueError as err:
            raise ValueError(f"{self.source} {where} column '{text}': {err}") from None

    def read(
        self, labels: Sequence[str], cells: list[Any], widths: list[int] | None = None
    ) -> None:
        """Append rows, converting whole columns at once: `cells[k]` holds column k's raw
        values, one per row; `widths` (CSV) the number of fields each row had."""
        table = self.table
        first, n = self.rows, len(labels)
        errors: dict[int, str] = {}
        if widths is not None:
            for i, width in enumerate(widths):
                if width != len(self.parsed):
                    errors[i] = (
                        f"{self.source} {labels[i]}: {width} fields, the header has "
                        f"{len(self.parsed)}"
                    )
        for (name, _), column in zip(self.parsed, cells, strict=True):
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
                if max(map(len, stripped), default=0) > MAX_TEXT_LENGTH:
                    for i, text in enumerate(stripped):
                        if len(text) > MAX_TEXT_LENGTH and i not in errors:
                            errors[i] = (
                                f"{self.source} {labels[i]} column '{name}': text of "
                                f"{len(text)} characters, at most {MAX_TEXT_LENGTH} allowed"
                            )
                            stripped[i] = text[:40] + "..."
                if _CONTROL.search("".join(stripped)):
                    for i, text in enumerate(stripped):
                        if (found := _CONTROL.search(text)) and i not in errors:
                            errors[i] = (
                                f"{self.source} {labels[i]} column '{name}': text holds the "
                                f"control character {ascii(found.group())} at character "
                                f"{found.start() + 1}"
                            )
                if name != "case":  # repeated texts (star, comment) share one string
                    seen = self.texts[name]
                    stripped = [seen.setdefault(text, text) for text in stripped]
                table.text_columns[name].extend(stripped)
                continue
            values, bad = _numbers(raw)
            for i, value in bad.items():
                if i not in errors:
                    what = "is not finite" if isinstance(value, float) else "is not a number"
                    shown = f"value {value}" if isinstance(value, float) else _shown(str(value))
                    errors[i] = f"{self.source} {labels[i]} column '{name}': {shown} {what}"
            self.numbers[name].extend(values * self.factors[name])
        self.labels.append(labels)
        self.errors.update((first + i, text) for i, text in errors.items())
        self.rows += n
        if errors and not self.collect:
            raise ValueError(errors[min(errors)])

    def finish(self) -> CaseTable:
        table = self.table
        for name, column in self.numbers.items():
            table.columns[name] = column.values()
        table.row_errors = [self.errors.get(i, "") for i in range(self.rows)]
        if self.labels and all(isinstance(block, LineLabels) for block in self.labels):
            lines = [block.lines for block in self.labels if isinstance(block, LineLabels)]
            table.row_labels = LineLabels(np.concatenate(lines))
        else:
            table.row_labels = [label for block in self.labels for label in block]
        self.labels.clear()
        table.names = table.text_columns["case"]
        return table


class _Column:
    """A numeric column filled block by block. Its buffer is allocated at the largest size the
    input can need and never touched beyond the rows written, so only those take memory and no
    block is copied twice."""

    def __init__(self, capacity: int):
        self.data = np.empty(max(capacity, 1))
        self.size = 0

    def extend(self, values: NDArray[np.float64]) -> None:
        end = self.size + len(values)
        if end > len(self.data):  # more rows than foreseen (short, malformed rows)
            grown = np.empty(max(end, 2 * len(self.data)))
            grown[: self.size] = self.data[: self.size]
            self.data = grown
        self.data[self.size : end] = values
        self.size = end

    def values(self) -> NDArray[np.float64]:
        return self.data[: self.size]


def _shown(text: str) -> str:
    """`text` quoted for a message, invisible and control characters escaped."""
    return f"'{text}'" if text.isprintable() else ascii(text)


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
    try:
        with path.open(newline="", encoding="utf-8-sig") as handle:
            return _read_csv(handle, source, errors == "collect")
    except UnicodeDecodeError:
        raise ValueError(_decode_error(path)) from None


class _Lines:
    """The physical lines of a CSV file, as `csv.reader` asks for them: counts them and, at
    the start of a record (`at_start`), skips comment lines (first character ``#``)."""

    def __init__(self, handle: Any):
        self.handle = handle
        self.number = 0  # lines read
        self.record_line = 0  # line where the current record starts
        self.at_start = True

    def __iter__(self) -> _Lines:
        return self

    def __next__(self) -> str:
        while True:
            line: str = next(self.handle)
            self.number += 1
            if not self.at_start:
                return line
            if not line.startswith("#"):
                self.at_start = False
                self.record_line = self.number
                return line


def _read_csv(handle: Any, source: str, collect: bool) -> CaseTable:
    """A CaseTable from an open CSV file, read record by record and converted in blocks."""
    lines = _Lines(handle)
    records = csv.reader(lines, strict=True)  # a quote left open is an error, not data

    def record() -> list[str] | None:
        """The next record that is not blank; None at the end of the file."""
        while True:
            lines.at_start = True
            try:
                fields = next(records)
            except StopIteration:
                return None
            except csv.Error as err:
                raise ValueError(
                    f"{source} line {lines.record_line}: cannot read the CSV record ({err}); "
                    "check its double quotes and length"
                ) from None
            if fields:
                return fields

    header = record()
    if header is None:
        raise ValueError(f"{source}: no header line")
    width = len(header)
    try:  # each data row takes at least its width - 1 separators
        capacity = os.fstat(handle.fileno()).st_size // max(width - 1, 1) + 1
    except (AttributeError, OSError):
        capacity = _BLOCK_ROWS
    reader = _Reader(source, header, f"line {lines.record_line}", collect, capacity)
    while True:
        starts: list[int] = []
        rows: list[list[str]] = []
        widths: list[int] = []
        while len(rows) < _BLOCK_ROWS and (fields := record()) is not None:
            starts.append(lines.record_line)
            widths.append(len(fields))
            rows.append(fields if len(fields) == width else (fields + [""] * width)[:width])
        if rows or reader.rows == 0:
            cells = [list(column) for column in zip(*rows, strict=True)] if rows else [[]] * width
            del rows
            reader.read(LineLabels(np.array(starts, dtype=np.int64)), cells, widths)
        if len(starts) < _BLOCK_ROWS:
            return reader.finish()


def _decode_error(path: Path) -> str:
    """Where `path` first fails to decode as UTF-8: its line and the offending byte."""
    with path.open("rb") as handle:
        for number, line in enumerate(handle, start=1):
            try:
                line.decode("utf-8-sig" if number == 1 else "utf-8")
            except UnicodeDecodeError as err:
                skip = 3 if number == 1 and line.startswith(b"\xef\xbb\xbf") else 0
                return (
                    f"{path} line {number}: not UTF-8 text (byte 0x{line[skip + err.start]:02x} "
                    f"at byte {skip + err.start + 1} of the line); save the table as UTF-8"
                )
    return f"{path}: not UTF-8 text; save the table as UTF-8"


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
    reader = _Reader(
        source, [str(name) for name in frame.columns], "header", errors == "collect", len(frame)
    )
    reader.read(
        [f"row {label}" for label in frame.index],
        [frame[name].to_numpy() for name in frame.columns],
    )
    return reader.finish()


def frame_from_table(table: Any) -> Any:
    """A pandas DataFrame in the case-table convention from an astropy Table or QTable.

    A column with a unit (a QTable's Quantity column, a Table column's ``unit``) becomes the
    header ``name [unit]`` with its numbers, the unit as astropy writes it; a unit whose text
    does not read back as exactly that unit (a scale rounded in print, ``1.23457e+17 / m3``; a
    unit astropy does not enable by default; a dimensionless count) is converted to the
    column's SI unit instead. A column without a unit is taken as it is, as a DataFrame's
    would be (``x_He``, ``planet_mass [M_earth]``). Masked cells become empty ("not given").
    Columns are converted whole, never row by row.

    Examples
    --------
    >>> import astropy.units as u
    >>> from astropy.table import QTable
    >>> table = QTable({"case": ["A"], "planet_mass": [2.0] * u.Mjup, "x_N2": [1.0]})
    >>> list(frame_from_table(table).columns)
    ['case', 'planet_mass [jupiterMass]', 'x_N2']
    """
    import pandas as pd

    kind = type(table).__name__
    data: dict[str, Any] = {}
    for name in table.colnames:
        column = table[name]
        if column.ndim != 1:
            raise ValueError(
                f"{kind} column '{name}' holds values of shape {column.shape[1:]} per row; a "
                "case table takes one value per row"
            )
        values = _column_values(column)
        unit = getattr(column, "unit", None)
        header = str(name)
        if unit is not None:
            if _HEADER.match(header) is None or "[" in header:
                raise ValueError(
                    f"{kind} column '{name}' has the unit '{unit}' and a name that is not a "
                    "quantity (a header with a [unit] takes no astropy unit besides)"
                )
            text = _units.exact_text(unit)
            si = _si_unit(header)
            if text is None or (si == "particles" and text == "1"):  # a count: u.one
                if si is None:
                    raise ValueError(
                        f"{kind} column '{name}': unknown column with the unit '{unit}'"
                    )
                try:
                    values = values * _units.unit_factor(unit, si)
                except ValueError as err:
                    raise ValueError(
                        f"{kind} column '{name}': unit '{unit}' does not measure {header} "
                        f"(which is in {si}); {err}"
                    ) from None
                text = si
            header = f"{header} [{text}]"
        mask = getattr(column, "mask", None)
        if mask is not None and np.any(mask):
            mask = np.broadcast_to(np.asarray(mask, dtype=bool), values.shape)
            if values.dtype.kind in "fiu":
                values = np.where(mask, np.nan, values.astype(float))
            else:
                values = values.astype(object)
                values[mask] = None
        data[header] = values
    return pd.DataFrame(data)


def _column_values(column: Any) -> NDArray[Any]:
    """The numbers (or texts) of an astropy Table column, without its unit or mask."""
    plain = getattr(column, "unmasked", column)  # a masked Quantity's values
    return np.asarray(getattr(plain, "value", plain))


def _is_astropy_table(value: Any) -> bool:
    module = sys.modules.get("astropy.table")  # present whenever such a table exists
    return module is not None and isinstance(value, module.Table)


def load_cases(cases: Any, errors: str = "raise") -> CaseTable:
    """A :class:`CaseTable` from a CSV path, a pandas DataFrame, an astropy Table or QTable
    (through :func:`frame_from_table`) or a CaseTable."""
    if isinstance(cases, CaseTable):
        return cases
    if isinstance(cases, (str, Path)):
        return read_case_table(cases, errors=errors)
    if _is_astropy_table(cases):
        return case_table_from_frame(
            frame_from_table(cases), source=type(cases).__name__, errors=errors
        )
    if hasattr(cases, "columns") and hasattr(cases, "index"):
        return case_table_from_frame(cases, errors=errors)
    raise ValueError(
        "cases must be a CSV path, a pandas DataFrame, an astropy Table or a CaseTable, got "
        f"{type(cases).__name__}"
    )


def _check_errors(errors: str) -> None:
    if errors not in ("raise", "collect"):
        raise ValueError(f"errors must be 'raise' or 'collect', got {errors!r}")
