"""The sweep file: the HDF5 file :func:`exosieve.compare` streams its results into, after the
core's ``sweep_file.hpp``.

Its case variables and coordinates are the core's list (``_core.sweep_file_variables()``,
``_core.sweep_file_coordinates()``): the declarations, valid ranges, CF flags and units here are
built from it. Dimensions ``case`` (appendable; the coordinate holds the case names, so that
xarray selects with ``.sel(case="name")``; the variable ``row`` holds the table row),
``species``, ``time`` (stellar age [s]) and ``sample``; every variable has ``units`` and
``long_name``, ``regime_start`` has CF's ``flag_values``/``flag_meanings``; the global
attribute ``config`` holds the table's fingerprint and every option as JSON, and
``Conventions`` is ``"exosieve-1"`` (see the README: CF's attributes, not CF itself).

Here a file is created, read (only its completed rows, each variable checked against its
range) and, for a sweep that resumes, checked and reopened for appending.
"""

from __future__ import annotations

import json
import math
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import _core
from .catalogue import _si_unit

__all__ = ["check_ranges", "input_units", "sample_runs"]


# Case variables of a sweep file (the core's list): name, dtype, dimensions after `case`, units,
# long name; those of every file, those of files with samples, and with samples and inputs.
_Variable = tuple[str, type, list[str], str, str]
_SCHEMA: list[dict[str, Any]] = _core.sweep_file_variables()
_DTYPES: dict[str, type] = {"float64": float, "int64": int, "str": str}


def _variables_when(condition: str) -> list[_Variable]:
    return [
        (v["name"], _DTYPES[v["dtype"]], list(v["dims"]), v["units"], v["long_name"])
        for v in _SCHEMA
        if v["present_when"] == condition
    ]


_VARIABLES = _variables_when("")
_SAMPLE_VARIABLES = _variables_when("samples")
_INPUT_VARIABLES = _variables_when("inputs")


# Coordinates of a sweep file (and `row`, the table row of each case; `input_unit`, the
# variable beside `input`): units, long name.
_COORDINATES: dict[str, tuple[str, str]] = {
    c["name"]: (c["units"], c["long_name"]) for c in _core.sweep_file_coordinates()
}

# CF flags of the code variables: values (of the variable's type) and one word per value.
_FLAGS: dict[str, tuple[list[int], str]] = {
    v["name"]: (list(v["flag_values"]), v["flag_meanings"]) for v in _SCHEMA if v["flag_values"]
}

# Units of the summary's columns: those of the file variables they come from.
_UNITS: dict[str, str] = {v["name"]: v["units"] for v in _SCHEMA if v["dtype"] != "str"}


# Variables that sweep files of this layout written before them lack, and what such a file
# stands for where a species ran: no given losses, and the thermal rate not recorded.
_ADDED_LATER: dict[str, float] = {"given_loss_rate_start": 0.0, "escape_rate_start": math.nan}
# Nor were the regime times and loss shares recorded.
_ADDED_LATER.update({name: math.nan for name, *_ in _VARIABLES if "regime_time_" in name})
_ADDED_LATER.update({name: math.nan for name, *_ in _VARIABLES if "loss_share" in name})


def _require_layout(path: Path) -> None:
    """Refuse a sweep file of an earlier layout (before ``Conventions``, whose ``case``
    coordinate held row numbers), naming what to do."""
    from .hdf5_io import read_attribute

    try:
        layout = read_attribute(path, "", "Conventions")
    except (OSError, ValueError):
        layout = "none"
    if layout != _core.RESULT_FILE_CONVENTIONS:
        raise ValueError(
            f"{path} is a sweep file of an earlier layout (Conventions {layout!r}, not "
            f"{_core.RESULT_FILE_CONVENTIONS!r}); run the sweep again (with overwrite to "
            "replace it)"
        )


def _read_variable(path: Path, name: str, rows: int, checked: bool = True) -> NDArray[Any]:
    """The first ``rows`` rows of ``name``; with ``checked``, refused if out of range."""
    from .hdf5_io import has_dataset, read_doubles, read_int64s, read_strings

    if name in _ADDED_LATER and not has_dataset(path, name):
        # A species ran where its e-folding time is a number (NaN: absent, or not run).
        ran = ~np.isnan(_read_variable(path, "efolding_time", rows, checked))
        return np.where(ran, _ADDED_LATER[name], np.nan)
    kind = {"case": "str", "row": "int"}.get(name)
    for variable, dtype, *_ in _VARIABLES + _SAMPLE_VARIABLES + _INPUT_VARIABLES:
        if variable == name:
            kind = {str: "str", int: "int", float: "float"}[dtype]
    if kind == "str":
        return np.asarray(read_strings(path, name)[:rows], dtype=object)
    reader = read_int64s if kind == "int" else read_doubles
    values = np.asarray(reader(path, name))
    if checked:
        _check_values(path, name, values, rows, values.shape[1:])
    return values[:rows]


def _existing_output(path: Path) -> tuple[dict[str, Any], int] | None:
    """The configuration and completed rows of an existing sweep file at ``path``; None when
    there is no file or an empty one. Raises for a file that is locked or not a sweep file."""
    from .hdf5_io import FileError, file_is_locked, read_attribute, read_int_attribute

    if not path.exists():
        return None
    if path.is_file() and file_is_locked(path):
        raise FileError(
            f"output {path} is locked: another process has it open for writing (a running "
            "sweep?); it was left alone. Wait for that process to end, or choose another path"
        )
    if path.is_file() and path.stat().st_size == 0:
        return None
    try:
        read_attribute(path, "", "exosieve_version")
        config = json.loads(read_attribute(path, "", "config"))
        rows = int(read_int_attribute(path, "", "completed"))
    except Exception:  # not HDF5, not ours, or not a sweep file
        config, rows = {}, -1
    if not isinstance(config, dict) or config.get("kind") != "exosieve.compare" or rows < 0:
        raise ValueError(
            f"output {path} exists and is not a sweep file of exosieve; it was left alone "
            "(exosieve replaces only its own result files, with or without overwrite): "
            "choose another path"
        )
    return config, rows


def _summary_text(summary: dict[str, Any]) -> str:
    retain = summary.get("retain")
    percentiles = ", ".join(f"{float(q):g}" for q in summary.get("percentiles", []))
    return f"retain={retain}, percentiles=({percentiles})"


# Allowed range of every stored variable, checked on opening and on resuming a file: a value
# outside it can only come from a damaged file. NaN marks a missing value and is allowed.
_RANGES: dict[str, tuple[float, float]] = {
    v["name"]: tuple(v["range"]) for v in _SCHEMA if v["range"] is not None
}


def _check_values(
    path: Path, name: str, values: NDArray[Any], rows: int, shape: tuple[int, ...]
) -> None:
    """Refuse ``values`` of ``name`` if their shape or range cannot be that of a sweep file."""
    if values.shape[1:] != shape or values.shape[0] < rows:
        raise _damaged(
            f"{path} is damaged: dataset '{name}' has shape {values.shape}, expected "
            f"({rows} or more, {', '.join(map(str, shape))})"
        )
    if name == "row":
        bad = values[:rows] != np.arange(rows)
    elif name in _RANGES:
        low, high = _RANGES[name]
        bad = (values[:rows] < low) | (values[:rows] > high)
    else:
        return
    if bad.any():
        where = tuple(int(i) for i in np.argwhere(bad)[0])
        allowed = "the row numbers" if name == "row" else "[{}, {}]".format(*_RANGES[name])
        value = values[:rows][where].item()
        raise _damaged(
            f"{path} is damaged: dataset '{name}' holds {value!r} at {where}, "
            f"outside {allowed}; it was not used"
        )


def check_ranges(
    path: Path,
    rows: int,
    samples: int,
    species: int,
    times: int | None = None,
    inputs: int = 0,
) -> None:
    """Read every variable of the first ``rows`` rows of a sweep file and check its range."""
    from .hdf5_io import read_doubles

    if times is None:
        times = len(read_doubles(path, "time"))
    sizes = {"species": species, "time": times, "sample": samples, "input": inputs}
    _check_values(path, "row", _read_variable(path, "row", rows, checked=False), rows, ())
    _read_variable(path, "case", rows)  # the labels: their string heaps are checked
    for name, _, dims, *_ in _variable_specs(samples, inputs):
        values = _read_variable(path, name, rows, checked=False)
        _check_values(path, name, values, rows, tuple(sizes[d] for d in dims))


def _damaged(message: str) -> Exception:
    from .hdf5_io import FileError

    error: Exception = FileError(message)
    return error


def _variable_specs(samples: int, inputs: int) -> list[tuple[str, type, list[str], str, str]]:
    """The case variables of a file with ``samples`` sample runs and ``inputs`` inputs."""
    return (
        _VARIABLES
        + (_SAMPLE_VARIABLES if samples else [])
        + (_INPUT_VARIABLES if samples and inputs else [])
    )


def input_units(inputs: Sequence[str]) -> list[str]:
    """SI unit of each case parameter in ``inputs`` (also the per-species ones, e.g.
    ``x_<species>``: 1, ``given_loss_<species>``: s-1)."""
    return [_si_unit(name) or "1" for name in inputs]


def sample_runs(options: dict[str, Any]) -> int:
    """Sample runs per case of a run with these ``config["options"]``: ``samples``, times
    (inputs + 2) for a Saltelli design."""
    samples = int(options.get("samples", 0))
    if options.get("design", "monte_carlo") == "saltelli":
        return samples * (len(options.get("inputs", [])) + 2)
    return samples


def _create_file(
    path: Path,
    config: dict[str, Any],
    species: list[str],
    times: NDArray[Any],
    samples: int,
    inputs: Sequence[str] = (),
) -> Any:
    from .hdf5_io import ResultAppender, ResultWriter

    schema = ResultWriter(path, config)
    schema.set_attribute("Conventions", _core.RESULT_FILE_CONVENTIONS)
    schema.label_cases(long_name=_COORDINATES["case"][1])
    schema.add_coordinate("species", list(species), long_name=_COORDINATES["species"][1])
    units, long_name = _COORDINATES["time"]
    schema.add_coordinate("time", np.asarray(times, dtype=float), units=units, long_name=long_name)
    variables = list(_VARIABLES)
    if samples:
        units, long_name = _COORDINATES["sample"]
        schema.add_coordinate(
            "sample", np.arange(samples, dtype=np.int64), units=units, long_name=long_name
        )
        variables += _SAMPLE_VARIABLES
        if inputs:
            schema.add_coordinate("input", list(inputs), long_name=_COORDINATES["input"][1])
            schema.add_variable(
                "input_unit",
                ["input"],
                input_units(inputs),
                units=_COORDINATES["input_unit"][0],
                long_name=_COORDINATES["input_unit"][1],
            )
            variables += _INPUT_VARIABLES
    for name, dtype, dims, units, long_name in variables:
        schema.add_case_variable(name, dtype, dims, units=units, long_name=long_name)
    schema.set_attribute("long_name", _COORDINATES["row"][1], dataset="row")
    for name, (values, meanings) in _FLAGS.items():
        schema.set_attribute("flag_values", values, dataset=name)
        schema.set_attribute("flag_meanings", meanings, dataset=name)
    return ResultAppender(schema)


def _run_key(config: dict[str, Any]) -> Any:
    """What must match for a file to be resumed: the table and the options that change results."""
    return (config.get("kind"), config.get("table", {}).get("sha256"), config.get("options"))


class _FileSink:
    def __init__(
        self,
        path: Path,
        config: dict[str, Any],
        species: list[str],
        times: Any,
        samples: int,
        overwrite: bool,
        source: Path | None = None,
        inputs: Sequence[str] = (),
    ) -> None:
        from .hdf5_io import ResultAppender

        self.path = path
        self.resumed = False
        if source is not None and path.exists() and path.samefile(source):
            raise ValueError(f"output {path} is the case table itself; choose another path")
        existing = _existing_output(path)
        if existing is not None and not overwrite and existing[1] > 0:
            old, rows = existing
            _require_layout(path)
            if _run_key(old) != _run_key(config):
                what = (
                    "of another case table"
                    if old.get("table", {}).get("sha256") != config["table"]["sha256"]
                    else "made with other options"
                )
                raise ValueError(
                    f"output {path} holds a sweep {what}; choose another path or overwrite it"
                )
            if old.get("summary") != config["summary"]:
                raise ValueError(
                    f"output {path} holds a sweep started with summary options "
                    f"{_summary_text(old.get('summary', {}))}, and these cannot change when it "
                    f"resumes (asked: {_summary_text(config['summary'])}); run again with the "
                    "same retain and percentiles, then summarise with others "
                    "('exosieve summary --retain ...', Comparison.summarize(retain=...))"
                )
            from .hdf5_io import has_dataset

            written = _VARIABLES + (_SAMPLE_VARIABLES if samples else [])
            missing = [v[0] for v in written if not has_dataset(path, v[0])]
            if missing and rows < int(config["table"]["rows"]):  # rows would be appended
                raise ValueError(
                    f"output {path} holds a sweep written by an earlier version of exosieve, "
                    f"without {', '.join(missing)}; it cannot be continued: choose another path "
                    "or overwrite it"
                )
            # Reopening first repairs a last chunk whose checksum a kill left stale (and
            # refuses a damaged one); then every variable is read and range-checked.
            self.appender = ResultAppender(path)
            try:
                check_ranges(path, rows, int(samples), len(species), inputs=len(inputs))
            except BaseException:
                self.appender.close()
                raise
            self.resumed = True
        else:
            # A new file, or one that holds no results (an empty file, or a sweep that stopped
            # before its first chunk); ResultWriter refuses to replace anything but an exosieve
            # result, and a file another process has locked.
            self.appender = _create_file(path, config, species, times, samples, inputs)

    @property
    def completed(self) -> int:
        """Rows in the file."""
        return int(self.appender.completed)

    def append(self, chunk: dict[str, Any]) -> None:
        self.appender.append(chunk)

    @property
    def target(self) -> Any:
        """What the batch engine hands its chunks to: the file itself, so that the engine
        appends each chunk's rows without building interpreter objects."""
        return self.appender

    def close(self) -> None:
        self.appender.close()
