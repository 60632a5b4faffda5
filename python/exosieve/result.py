"""Results of :func:`exosieve.evolve`: time series per species, diagnostics, and their files.

Files are HDF5, written by the C++ core (temporary name, then renamed over the target), with
dimensions ``time``, ``species``, ``ratio`` and ``escape_regime``, CF-style ``units`` and
``long_name`` on every variable and the model configuration as JSON in the global attribute
``config``. They open with :func:`open_result`, with h5py, and with
``xarray.open_dataset(path, engine="h5netcdf")``.
"""

from __future__ import annotations

import json
import math
import os
from collections.abc import Iterator, Mapping
from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import _core
from .hydrodynamic import REGIMES

__all__ = ["EvolutionResult", "PerName", "open_result", "VARIABLES"]

_SCHEMA: list[dict[str, Any]] = _core.evolution_file_variables()


def _described(keep: Any) -> dict[str, tuple[str, str]]:
    return {v["name"]: (v["units"], v["long_name"]) for v in _SCHEMA if keep(v)}


#: Per-time-and-species variables: name -> (units, long_name).
SPECIES_VARIABLES = _described(lambda v: v["dims"] == ["time", "species"])
#: Per-time variables: name -> (units, long_name).
TIME_VARIABLES = _described(lambda v: v["dims"] == ["time"] and not v["present_when"])
#: Per-time variables of a run with an envelope: name -> (units, long_name).
ENVELOPE_VARIABLES = _described(lambda v: v["dims"] == ["time"] and v["present_when"] == "envelope")
#: Every variable of a result file with its units and long name (the core's list).
VARIABLES = _described(lambda v: True)
#: Where the time and the loss went, per species (and ``escape_regime``, the regime names of
#: :data:`exosieve.REGIMES`): name -> (dimensions, units, long_name), from the core's list.
LOSS_VARIABLES: dict[str, tuple[tuple[str, ...], str, str]] = {
    v["name"]: (tuple(v["dims"]), v["units"], v["long_name"])
    for v in _SCHEMA
    if v["name"]
    in (
        "regime_time",
        "regime_loss",
        "energy_limited_loss",
        "given_loss",
        "non_jeans_loss_share",
        "bulk_regime_time",
    )
}
#: CF flags of ``regime``: its codes (int64, the variable's type) and one word per code.
_REGIME = next(v for v in _SCHEMA if v["name"] == "regime")
REGIME_FLAGS: dict[str, Any] = {
    "flag_values": np.asarray(_REGIME["flag_values"], dtype=np.int64),
    "flag_meanings": _REGIME["flag_meanings"],
}
#: Coordinates of a result file: name -> (units, long_name).
COORDINATES = {c["name"]: (c["units"], c["long_name"]) for c in _core.evolution_file_coordinates()}


class PerName(Mapping[str, Any]):
    """Columns of a (time x name) array, looked up by species or ratio name.

    ``result.inventory["H"]`` is the time series of H; ``.values`` is the whole array.
    """

    # The whole array, by its documented name; it shadows Mapping.values() on purpose.
    values: NDArray[Any]  # type: ignore[assignment]

    def __init__(self, names: list[str], values: NDArray[Any]) -> None:
        self.names = list(names)
        self.values = values
        self._index = {n: i for i, n in enumerate(self.names)}

    def __getitem__(self, name: str) -> NDArray[Any]:
        try:
            return self.values[:, self._index[name]]
        except KeyError:
            raise KeyError(f"{name!r} is not among {self.names}") from None

    def __iter__(self) -> Iterator[str]:
        return iter(self.names)

    def __len__(self) -> int:
        return len(self.names)

    def __repr__(self) -> str:
        return f"PerName({self.names}, shape={self.values.shape})"


class EvolutionResult:
    """Output of :func:`exosieve.evolve` or :func:`open_result` [SI units].

    Attributes
    ----------
    time : ndarray
        Output times (stellar age) [s].
    species : list of str
        Species names.
    inventory, escape_rate, source_rate, given_loss_rate, jeans_parameter : PerName
        Per species: particles [1], thermal escape rate [s^-1], source rate [s^-1], the given
        (non-thermal or external) loss rate [s^-1], Jeans parameter at the exobase [1];
        ``result.inventory["H"]`` is an array over time. The total loss is
        ``escape_rate + given_loss_rate``.
    isotope_ratio : PerName
        Ratios such as ``"D/H"`` over time [1].
    exobase_radius, exobase_temperature, xuv_flux : ndarray
        [m], [K], [W m^-2] over time (xuv_flux NaN without a star).
    regime : ndarray of int
        Regime code over time (see :data:`exosieve.REGIMES`); ``regime_names`` gives names.
    energy_limited : ndarray of int
        1 where energy-limited loss acted.
    depletion_time : dict of str to float or None
        Time [s] each species fell below the depletion fraction; None where it did not.
    regime_changes : list of (float, str, str)
        Located regime changes: (time [s], from, to).
    regime_time : ndarray
        Time [s] each species (rows, in ``species`` order) spent in each regime (columns, in
        :data:`exosieve.REGIMES` order) of its own Jeans parameter at the exobase
        (hydrodynamic where the exobase model finds no exobase); changes located on the
        integrator's dense output.
    regime_loss : ndarray
        Particles [1] each species lost at the Jeans rate while in each regime, energy-limited
        loss off (species x regime, as ``regime_time``).
    energy_limited_loss, given_loss : ndarray
        Particles [1] each species lost while energy-limited loss acted, and to the given
        losses. With ``regime_loss`` they make up the whole loss, ``N(t_start) - N(t_end)``
        plus the sources (the parts sum to it to rounding).
    non_jeans_loss_share : dict of str to float
        Share [1] of each species' loss taken outside the Jeans picture: all but the Jeans-rate
        loss in the Jeans regime (``1 - regime_loss[:, 0] / total``); 0 where nothing was lost.
        :meth:`loss_shares` gives every part.
    bulk_regime_time : ndarray
        Time [s] the bulk gas (the densest species at the exobase, as ``regime``) spent in each
        regime.
    envelope_mass, planet_radius, envelope_loss_rate : ndarray or None
        With an envelope (``evolve(..., envelope=...)``): envelope mass [kg], planet radius
        (core plus envelope) [m] and envelope mass-loss rate [kg s^-1] over time; None
        without one.
    core_mass : float or None
        Core mass [kg] of a run with an envelope; None without one.
    stripping_time : float or None
        Stellar age [s] when the envelope is gone; None when it is not (or without one).
    steps, rejected_steps, rhs_evaluations : int
        Integration diagnostics.
    stepper : str
        The Odeint stepper used: ``"dopri5"`` or ``"rosenbrock4"``.
    completed : bool
        False when the run was stopped before the end of t_span.
    config : dict
        The full model configuration.
    """

    def __init__(self, data: Mapping[str, Any]) -> None:
        self.time: NDArray[np.float64] = np.asarray(data["time"], dtype=np.float64)
        self.species: list[str] = [str(s) for s in data["species"]]
        ratios = [str(s) for s in data["ratio_names"]]
        for name in SPECIES_VARIABLES:
            setattr(self, name, PerName(self.species, np.asarray(data[name], dtype=np.float64)))
        self.isotope_ratio = PerName(
            ratios,
            np.asarray(data["isotope_ratio"], dtype=np.float64).reshape(
                len(self.time), len(ratios)
            ),
        )
        for name in ("exobase_radius", "exobase_temperature", "xuv_flux"):
            setattr(self, name, np.asarray(data[name], dtype=np.float64))
        self.regime: NDArray[np.int64] = np.asarray(data["regime"], dtype=np.int64)
        self.energy_limited: NDArray[np.int64] = np.asarray(data["energy_limited"], dtype=np.int64)
        depletion = np.asarray(data["depletion_time"], dtype=np.float64)
        self.depletion_time: dict[str, float | None] = {
            s: (None if math.isnan(t) else float(t))
            for s, t in zip(self.species, depletion, strict=True)
        }
        self.regime_changes: list[tuple[float, str, str]] = [
            (float(t), str(a), str(b)) for t, a, b in data["regime_changes"]
        ]
        self.initial_inventory = np.asarray(data["initial_inventory"], dtype=np.float64)
        self.species_mass = np.asarray(data["species_mass"], dtype=np.float64)
        for name in LOSS_VARIABLES:
            array = np.asarray(data[name], np.float64)
            setattr(self, "_" + name if name == "non_jeans_loss_share" else name, array)
        self.non_jeans_loss_share: dict[str, float] = {
            s: float(v) for s, v in zip(self.species, self._non_jeans_loss_share, strict=True)
        }
        self.steps = int(data["steps"])
        self.rejected_steps = int(data["rejected_steps"])
        self.rhs_evaluations = int(data["rhs_evaluations"])
        self.stepper = str(data["stepper"])
        self.completed = bool(data["completed"])
        self.t_reached = float(data["t_reached"])
        self.config_json: str = str(data["config"])
        self._config: dict[str, Any] | None = None
        with_envelope = data.get("core_mass") is not None
        for name in ENVELOPE_VARIABLES:
            values = np.asarray(data[name], dtype=np.float64) if with_envelope else None
            setattr(self, name, values)
        self.core_mass: float | None = float(data["core_mass"]) if with_envelope else None
        stripped = float(data["stripping_time"]) if with_envelope else math.nan
        self.stripping_time: float | None = None if math.isnan(stripped) else stripped

    regime_time: NDArray[np.float64]
    regime_loss: NDArray[np.float64]
    energy_limited_loss: NDArray[np.float64]
    given_loss: NDArray[np.float64]
    bulk_regime_time: NDArray[np.float64]
    _non_jeans_loss_share: NDArray[np.float64]
    inventory: PerName
    escape_rate: PerName
    source_rate: PerName
    given_loss_rate: PerName
    jeans_parameter: PerName
    exobase_radius: NDArray[np.float64]
    exobase_temperature: NDArray[np.float64]
    xuv_flux: NDArray[np.float64]
    envelope_mass: NDArray[np.float64] | None
    planet_radius: NDArray[np.float64] | None
    envelope_loss_rate: NDArray[np.float64] | None

    @classmethod
    def _from_core(cls, raw: Any) -> EvolutionResult:
        return cls(
            {
                "time": raw.time,
                "species": raw.species,
                "ratio_names": raw.ratio_names,
                "inventory": raw.inventory,
                "escape_rate": raw.escape_rate,
                "source_rate": raw.source_rate,
                "given_loss_rate": raw.given_loss_rate,
                "jeans_parameter": raw.jeans_parameter,
                "isotope_ratio": raw.isotope_ratio,
                "exobase_radius": raw.exobase_radius,
                "exobase_temperature": raw.exobase_temperature,
                "xuv_flux": raw.xuv_flux,
                "regime": raw.regime,
                "energy_limited": raw.energy_limited,
                "depletion_time": raw.depletion_time,
                "regime_changes": [
                    (c.time, REGIMES[c.from_regime], REGIMES[c.to_regime])
                    for c in raw.regime_changes
                ],
                "initial_inventory": raw.initial_inventory,
                "species_mass": raw.species_mass,
                **{name: getattr(raw, name) for name in LOSS_VARIABLES},
                "steps": raw.steps,
                "rejected_steps": raw.rejected_steps,
                "rhs_evaluations": raw.rhs_evaluations,
                "stepper": raw.stepper,
                "completed": raw.completed,
                "t_reached": raw.t_reached,
                "config": raw.config,
                **(
                    {
                        "envelope_mass": raw.envelope_mass,
                        "planet_radius": raw.planet_radius,
                        "envelope_loss_rate": raw.envelope_loss_rate,
                        "core_mass": raw.core_mass,
                        "stripping_time": raw.stripping_time,
                    }
                    if raw.has_envelope
                    else {}
                ),
            }
        )

    @property
    def config(self) -> dict[str, Any]:
        """The full model configuration (parsed from :attr:`config_json`)."""
        if self._config is None:
            self._config = json.loads(self.config_json)
        return self._config

    def loss_shares(self) -> dict[str, dict[str, float]]:
        """Share [1] of each species' loss by where it went.

        Keys per species: the regimes of :data:`exosieve.REGIMES` (loss at the Jeans rate in
        that regime), ``"energy_limited"`` and ``"given"``; they sum to 1 (all 0 where nothing
        was lost).

        Examples
        --------
        >>> import exosieve
        >>> from exosieve import constants as c
        >>> planet = exosieve.Planet(c.M_EARTH, c.R_EARTH)
        >>> exo = exosieve.PrescribedExobase(c.R_EARTH + 500e3, 1500.0, {"H": 1e11})
        >>> run = exosieve.evolve(planet, exo, {"H": 1e40}, (0.0, c.GYR))
        >>> run.loss_shares()["H"]["enhanced_jeans"], run.non_jeans_loss_share["H"]
        (1.0, 1.0)
        """
        shares: dict[str, dict[str, float]] = {}
        for i, s in enumerate(self.species):
            parts = [*self.regime_loss[i], self.energy_limited_loss[i], self.given_loss[i]]
            total = sum(float(p) for p in parts)  # in the order the sweep adds them
            names = [*REGIMES, "energy_limited", "given"]
            shares[s] = {
                k: float(v / total) if total > 0 else 0.0 for k, v in zip(names, parts, strict=True)
            }
        return shares

    @property
    def regime_names(self) -> list[str]:
        """Regime name at each output time."""
        return [REGIMES[k] for k in self.regime]

    @property
    def ratio_names(self) -> list[str]:
        """Names of the isotope ratios, e.g. ``["D/H"]``."""
        return list(self.isotope_ratio.names)

    def __repr__(self) -> str:
        return (
            f"<EvolutionResult {len(self.species)} species, {len(self.time)} times "
            f"[{self.time[0]:.4g}, {self.time[-1]:.4g}] s, {self.steps} steps "
            f"({self.rejected_steps} rejected){'' if self.completed else ', stopped early'}>"
        )

    def _fields(self) -> dict[str, Any]:
        envelope: dict[str, Any] = {}
        if self.core_mass is not None:
            envelope = {n: getattr(self, n) for n in ENVELOPE_VARIABLES}
            envelope["core_mass"] = self.core_mass
            envelope["stripping_time"] = (
                math.nan if self.stripping_time is None else self.stripping_time
            )
        return {
            **envelope,
            "time": self.time,
            "species": self.species,
            "ratio_names": self.ratio_names,
            **{n: getattr(self, n).values for n in SPECIES_VARIABLES},
            "isotope_ratio": self.isotope_ratio.values,
            **{n: getattr(self, n) for n in TIME_VARIABLES},
            "depletion_time": np.array(
                [np.nan if t is None else t for t in self.depletion_time.values()]
            ),
            "initial_inventory": self.initial_inventory,
            "species_mass": self.species_mass,
            **{n: getattr(self, n) for n in LOSS_VARIABLES if n != "non_jeans_loss_share"},
            "non_jeans_loss_share": self._non_jeans_loss_share,
            "steps": self.steps,
            "rejected_steps": self.rejected_steps,
            "rhs_evaluations": self.rhs_evaluations,
            "stepper": self.stepper,
            "completed": self.completed,
            "t_reached": self.t_reached,
            "config": self.config_json,
            "regime_changes": json.dumps(
                [{"time_s": t, "from": a, "to": b} for t, a, b in self.regime_changes]
            ),
        }

    def to_hdf5(self, path: str | os.PathLike[str]) -> None:
        """Write the result to an HDF5 file at ``path`` (replaced atomically).

        The layout is described in the module docstring; read it back with
        :func:`open_result` or ``xarray.open_dataset(path, engine="h5netcdf")``.
        """
        fields = self._fields()
        fields["regime_changes"] = list(self.regime_changes)
        _core.write_result(os.fspath(path), fields)

    def to_xarray(self) -> Any:
        """The result as an ``xarray.Dataset`` with the file's dimensions, units and names."""
        import xarray as xr

        f = self._fields()
        labels = {
            "time": self.time,
            "species": np.array(self.species, dtype=object),
            "ratio": np.array(self.ratio_names, dtype=object),
            "escape_regime": np.array(REGIMES, dtype=object),
        }
        has = {"": True, "ratios": bool(self.ratio_names), "envelope": self.core_mass is not None}
        coords = {
            name: (name, labels[name], {"units": units, "long_name": long_name})
            for name, (units, long_name) in COORDINATES.items()
            if name != "ratio" or self.ratio_names
        }
        data: dict[str, tuple[tuple[str, ...], Any, dict[str, Any]]] = {}
        for v in _SCHEMA:  # the file's variables, in its order
            if not has[v["present_when"]]:
                continue
            shape = [len(labels[d]) for d in v["dims"]]
            values = np.asarray(f[v["name"]], dtype=np.int64 if v["dtype"] == "int64" else float)
            attrs: dict[str, Any] = {"units": v["units"], "long_name": v["long_name"]}
            if v["flag_values"]:
                attrs["flag_values"] = np.asarray(v["flag_values"], dtype=np.int64)
                attrs["flag_meanings"] = v["flag_meanings"]
            data[v["name"]] = (tuple(v["dims"]), values.reshape(shape), attrs)
        return xr.Dataset(
            data,
            coords=coords,
            attrs={
                "Conventions": _core.RESULT_FILE_CONVENTIONS,
                "config": self.config_json,
                "regime_changes": f["regime_changes"],
                "exosieve_version": str(self.config.get("version", "")),
                "stepper": self.stepper,
            },
        )

    def to_pandas(self) -> Any:
        """A ``pandas.DataFrame`` indexed by time [s] with (quantity, species) columns;
        per-time quantities have an empty species label.

        Units follow the convention of :attr:`exosieve.Comparison.summary`:
        ``frame.attrs["units"]`` maps each quantity (and the index, ``"time"``) to its unit
        string, as in the result file's ``units`` attributes; ``frame.attrs["long_names"]``
        gives their descriptions. pandas keeps ``attrs`` through most operations on the frame
        (selections, arithmetic) but drops them where frames with different ``attrs`` are
        combined (``pd.concat``, ``merge``).

        Examples
        --------
        >>> import exosieve
        >>> from exosieve import constants as c
        >>> planet = exosieve.Planet(c.M_EARTH, c.R_EARTH)
        >>> exo = exosieve.PrescribedExobase(c.R_EARTH + 500e3, 1000.0, {"H": 1e11})
        >>> frame = exosieve.evolve(planet, exo, {"H": 1e40}, (0.0, c.GYR)).to_pandas()
        >>> frame.attrs["units"]["escape_rate"], frame.attrs["units"]["time"]
        ('s-1', 's')
        """
        import pandas as pd

        columns: dict[tuple[str, str], Any] = {}
        for name in SPECIES_VARIABLES:
            per = getattr(self, name)
            for s in self.species:
                columns[(name, s)] = per[s]
        for r in self.ratio_names:
            columns[("isotope_ratio", r)] = self.isotope_ratio[r]
        for name in TIME_VARIABLES:
            columns[(name, "")] = getattr(self, name)
        if self.core_mass is not None:
            for name in ENVELOPE_VARIABLES:
                columns[(name, "")] = getattr(self, name)
        frame = pd.DataFrame(columns, index=pd.Index(self.time, name="time"))
        frame.columns = pd.MultiIndex.from_tuples(frame.columns, names=["quantity", "species"])
        quantities = ["time", *dict.fromkeys(frame.columns.get_level_values("quantity"))]
        described = {"time": COORDINATES["time"], **VARIABLES}
        frame.attrs["units"] = {q: described[q][0] for q in quantities}
        frame.attrs["long_names"] = {q: described[q][1] for q in quantities}
        return frame


def open_result(path: str | os.PathLike[str]) -> EvolutionResult:
    """Read a result file written by :meth:`EvolutionResult.to_hdf5`.

    Examples
    --------
    >>> import exosieve, tempfile, os
    >>> from exosieve import constants as c
    >>> planet = exosieve.Planet(c.M_EARTH, c.R_EARTH)
    >>> exo = exosieve.PrescribedExobase(c.R_EARTH + 500e3, 1000.0, {"H": 1e11})
    >>> r = exosieve.evolve(planet, exo, {"H": 1e40}, (0.0, c.GYR))
    >>> path = os.path.join(tempfile.mkdtemp(), "run.h5")
    >>> r.to_hdf5(path)
    >>> bool(exosieve.open_result(path).inventory["H"][-1] == r.inventory["H"][-1])
    True
    """
    return EvolutionResult._from_core(_core.read_result(path))
