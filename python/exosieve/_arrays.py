"""Argument handling shared by the array functions: units, broadcasting, scalar results."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import _core

FloatOrArray = float | NDArray[np.float64]


def _refuse_kind(array: NDArray[Any], value: Any, name: str) -> None:
    kind = array.dtype.kind
    if kind == "b":
        raise ValueError(f"{name} must be a number, got a bool ({value!r})")
    if kind == "c":
        raise ValueError(f"{name} must be real, got a complex value ({value!r})")
    if kind in "USV":
        raise ValueError(f"{name} must be a number or an array of numbers, got {value!r}")


def _describe(value: Any) -> str:
    if isinstance(value, int) and not isinstance(value, bool) and abs(value) > 10**20:
        return f"an integer of {len(str(abs(value)))} digits"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def to_si(value: Any, name: str, unit: str, *, species_names: bool = False) -> NDArray[np.float64]:
    """Return ``value`` as a float64 array in SI ``unit``.

    Astropy ``Quantity`` objects are converted (temperatures with the temperature
    equivalency, so degrees Celsius work); a :class:`exosieve.Species` given for a mass becomes
    that species' mass [kg]. A ``str`` is a species name only where ``species_names`` is set
    (the ``mass`` argument of the functions documented to take species names); elsewhere it is
    refused. Plain numbers are taken as SI; bools, complex numbers and integers beyond the
    double range are refused with a ValueError naming ``name``.
    """
    if isinstance(value, str):
        if not (species_names and unit == "kg"):
            raise ValueError(f"{name} must be a number or an array of numbers, got {value!r}")
        try:
            value = _core.species(value)
        except ValueError as err:
            raise ValueError(f"{name} must be a mass [kg] or a species name: {err}") from err
    if isinstance(value, _core.Species):
        if unit != "kg":
            raise ValueError(f"{name}: a species stands for a mass, not for [{unit}]")
        return np.asarray(value.mass, dtype=np.float64)
    if isinstance(value, (bool, np.bool_)):
        raise ValueError(f"{name} must be a number, got a bool ({value!r})")
    if hasattr(value, "unit") and hasattr(value, "to_value"):
        import astropy.units as u  # only reached when astropy made the value

        equivalencies = u.temperature() if unit == "K" else []
        try:
            converted = np.asarray(value.to_value(unit, equivalencies=equivalencies))
        except u.UnitConversionError as err:
            raise ValueError(f"{name}: cannot convert {value!r} to [{unit}]") from err
        _refuse_kind(converted, value, name)
        return np.asarray(converted, dtype=np.float64)
    try:
        raw = np.asarray(value)
        _refuse_kind(raw, value, name)
        if raw.dtype.kind == "O" or isinstance(value, (list, tuple)):
            # a nested sequence may mix bools, strings or complex numbers into numbers
            items = np.asarray(value, dtype=object).reshape(-1)
            for item in items:
                if isinstance(item, (bool, np.bool_, str, complex, np.complexfloating)):
                    raise ValueError(
                        f"{name} must be a number or an array of numbers, got {_describe(value)}"
                    )
        return np.asarray(raw, dtype=np.float64)
    except OverflowError as err:
        raise ValueError(
            f"{name} must be finite, got {_describe(value)} (beyond the range of a double)"
        ) from err
    except (TypeError, ValueError) as err:
        if str(err).startswith(name):
            raise
        raise ValueError(
            f"{name} must be a number or an array of numbers, got {_describe(value)}"
        ) from err


def real_number(value: Any, name: str, unit: str) -> float:
    """``value`` as one finite float in SI ``unit``; a ValueError naming ``name`` otherwise."""
    array = to_si(value, name, unit)
    if array.size != 1:
        raise ValueError(f"{name} must be a single number, got an array of shape {array.shape}")
    number = float(array.reshape(()))
    if not np.isfinite(number):
        raise ValueError(f"{name} must be finite [{unit}], got {number!r}")
    return number


def whole_number(value: Any, name: str, minimum: int, what: str = "") -> int:
    """``value`` as an int >= ``minimum`` (and within int64); a ValueError naming ``name``
    and the value otherwise. ``what`` is the unit shown, e.g. " [cases]"."""
    need = f"{name} must be a whole number >= {minimum}{what}"
    if isinstance(value, (bool, np.bool_)):
        raise ValueError(f"{need}, got a bool ({value!r})")
    if isinstance(value, (complex, np.complexfloating)):
        raise ValueError(f"{need}, got a complex value ({value!r})")
    if not isinstance(value, (int, np.integer)):
        raise ValueError(f"{need}, got {_describe(value)}")
    if value < minimum:
        raise ValueError(f"{need}, got {value!r}")
    if value > np.iinfo(np.int64).max:
        raise ValueError(f"{need}, got {_describe(value)} (beyond the range of int64)")
    return int(value)


def flat_for_kernel(array: NDArray[np.float64], shape: tuple[int, ...]) -> NDArray[np.float64]:
    """A contiguous 1-D view (or a length-1 array) that the C++ kernel can broadcast."""
    if array.size == 1:
        return array.reshape(1)
    if array.shape != shape:
        array = np.broadcast_to(array, shape)
    return np.ascontiguousarray(array).reshape(-1)


def apply(
    kernel: Callable[..., NDArray[np.float64]],
    args: list[tuple[str, Any, str]],
    *extra: Any,
    species_argument: str | None = "mass",
) -> FloatOrArray:
    """Call ``kernel(count, *flat_args, *extra)`` with numpy broadcasting of ``args``.

    ``args`` holds ``(name, value, unit)``; returns a float for all-scalar input. A species
    name is taken only for the argument called ``species_argument`` (None: for none).
    """
    arrays = [
        to_si(value, name, unit, species_names=name == species_argument)
        for name, value, unit in args
    ]
    try:
        shape = np.broadcast_shapes(*(a.shape for a in arrays))
    except ValueError as err:
        shapes = ", ".join(f"{name}{a.shape}" for (name, _, _), a in zip(args, arrays, strict=True))
        raise ValueError(f"arguments do not broadcast together: {shapes}") from err
    count = int(np.prod(shape, dtype=np.int64))
    flat = [flat_for_kernel(a, shape) for a in arrays]
    result = kernel(count, *flat, *extra).reshape(shape)
    return float(result) if shape == () else result
