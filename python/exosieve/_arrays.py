"""Argument handling shared by the array functions: units, broadcasting, scalar results."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import _core

FloatOrArray = float | NDArray[np.float64]


def to_si(value: Any, name: str, unit: str) -> NDArray[np.float64]:
    """Return ``value`` as a float64 array in SI ``unit``.

    Astropy ``Quantity`` objects are converted (temperatures with the temperature
    equivalency, so degrees Celsius work); a :class:`exosieve.Species` or a species name
    given for a mass becomes that species' mass [kg]. Plain numbers are taken as SI.
    """
    if unit == "kg" and isinstance(value, str):
        value = _core.species(value)
    if isinstance(value, _core.Species):
        if unit != "kg":
            raise ValueError(f"{name}: a species stands for a mass, not for [{unit}]")
        return np.asarray(value.mass, dtype=np.float64)
    if hasattr(value, "unit") and hasattr(value, "to_value"):
        import astropy.units as u  # only reached when astropy made the value

        equivalencies = u.temperature() if unit == "K" else []
        try:
            return np.asarray(value.to_value(unit, equivalencies=equivalencies), dtype=np.float64)
        except u.UnitConversionError as err:
            raise ValueError(f"{name}: cannot convert {value!r} to [{unit}]") from err
    try:
        return np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError) as err:
        raise ValueError(f"{name} must be a number or an array of numbers, got {value!r}") from err


def flat_for_kernel(array: NDArray[np.float64], shape: tuple[int, ...]) -> NDArray[np.float64]:
    """A contiguous 1-D view (or a length-1 array) that the C++ kernel can broadcast."""
    if array.size == 1:
        return array.reshape(1)
    if array.shape != shape:
        array = np.broadcast_to(array, shape)
    return np.ascontiguousarray(array).reshape(-1)


def apply(
    kernel: Callable[..., NDArray[np.float64]], args: list[tuple[str, Any, str]], *extra: Any
) -> FloatOrArray:
    """Call ``kernel(count, *flat_args, *extra)`` with numpy broadcasting of ``args``.

    ``args`` holds ``(name, value, unit)``; returns a float for all-scalar input.
    """
    arrays = [to_si(value, name, unit) for name, value, unit in args]
    try:
        shape = np.broadcast_shapes(*(a.shape for a in arrays))
    except ValueError as err:
        shapes = ", ".join(f"{name}{a.shape}" for (name, _, _), a in zip(args, arrays, strict=True))
        raise ValueError(f"arguments do not broadcast together: {shapes}") from err
    count = int(np.prod(shape, dtype=np.int64))
    flat = [flat_for_kernel(a, shape) for a in arrays]
    result = kernel(count, *flat, *extra).reshape(shape)
    return float(result) if shape == () else result
