"""Argument handling shared by the array functions: units, broadcasting, scalar results."""

from __future__ import annotations

import math
import sys
from collections.abc import Callable
from typing import Any

import numpy as np
from numpy.typing import DTypeLike, NDArray

from . import _core

#: What an array function returns: a float for scalar input (a numpy scalar with a ``dtype``
#: other than float64), else an array in the container the arguments came in (numpy array,
#: pandas Series or DataFrame, xarray DataArray, dask array), or ``out`` when given.
FloatOrArray = float | NDArray[np.floating[Any]] | Any


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


def _scalar(value: Any, name: str, unit: str) -> float:
    if type(value) is float:  # the common case, no conversion needed
        return value
    array = to_si(value, name, unit)
    if array.ndim != 0 and array.size != 1:
        raise ValueError(f"{name} must be a single number, got an array of shape {array.shape}")
    return float(array.reshape(()))


def _vector(value: Any, name: str, unit: str) -> NDArray[np.float64]:
    if isinstance(value, (list, tuple)) and any(hasattr(v, "unit") for v in value):
        value = [to_si(v, name, unit) for v in value]  # e.g. (10 * u.Myr, 1 * u.Gyr)
    array = np.atleast_1d(to_si(value, name, unit))
    if array.ndim != 1:
        raise ValueError(f"{name} must be one-dimensional, got shape {array.shape}")
    return np.ascontiguousarray(array)


def _finite(value: Any, name: str, unit: str) -> float:
    number = _scalar(value, name, unit)
    if not math.isfinite(number):
        raise ValueError(f"{name} must be finite [{unit}], got {number!r}")
    return number


def _finite_vector(value: Any, name: str, unit: str) -> NDArray[np.float64]:
    array = _vector(value, name, unit)
    bad = np.flatnonzero(~np.isfinite(array))
    if bad.size:
        raise ValueError(
            f"{name} must be finite [{unit}], got {float(array[bad[0]])!r} (element {bad[0]})"
        )
    return array


def _map(
    function: Callable[[NDArray[np.float64]], NDArray[np.float64]], value: Any, name: str, unit: str
) -> FloatOrArray:
    array = to_si(value, name, unit)
    out = function(np.ascontiguousarray(array).reshape(-1)).reshape(array.shape)
    return float(out) if array.ndim == 0 else out


def flat_for_kernel(array: NDArray[np.float64], shape: tuple[int, ...]) -> NDArray[np.float64]:
    """A contiguous 1-D view (or a length-1 array) that the C++ kernel can broadcast."""
    if array.size == 1:
        return array.reshape(1)
    if array.shape != shape:
        array = np.broadcast_to(array, shape)
    return np.ascontiguousarray(array).reshape(-1)


def _floating(dtype: DTypeLike, name: str = "dtype") -> np.dtype[Any]:
    """``dtype`` as a numpy floating dtype; a ValueError naming ``name`` otherwise."""
    try:
        kind = np.dtype(dtype)
    except TypeError as err:
        raise ValueError(f"{name} must be a floating-point dtype, got {dtype!r}") from err
    if kind.kind != "f":
        raise ValueError(f"{name} must be a floating-point dtype, got {kind}")
    return kind


def _module(name: str) -> Any:
    """The module ``name`` if the caller's program has imported it already, else None: a
    container type can only come from a library that is loaded, so none is imported here."""
    return sys.modules.get(name)


# Types that are never a container: most calls have only these and skip the look-ups.
_PLAIN = (float, int, str, np.ndarray, np.float64, list, tuple)


def _kind_of(values: list[Any]) -> str:
    """Which container the arguments come in: "xarray", "dask", "pandas" or "numpy"."""
    if all(type(v) in _PLAIN for v in values):
        return "numpy"
    xr, da, pd = _module("xarray"), _module("dask.array"), _module("pandas")
    if xr is not None and any(isinstance(v, xr.DataArray) for v in values):
        return "xarray"
    if da is not None and any(isinstance(v, da.Array) for v in values):
        return "dask"
    if pd is not None and any(isinstance(v, (pd.Series, pd.DataFrame)) for v in values):
        return "pandas"
    return "numpy"


def apply(
    kernel: Callable[..., NDArray[np.float64]],
    args: list[tuple[str, Any, str]],
    *extra: Any,
    species_argument: str | None = "mass",
    out: Any = None,
    dtype: DTypeLike | None = None,
) -> FloatOrArray:
    """Call ``kernel(count, *flat_args, *extra)`` with numpy broadcasting of ``args``.

    ``args`` holds ``(name, value, unit)``. A species name is taken only for the argument
    called ``species_argument`` (None: for none). As numpy ufuncs do: ``out`` (a float array
    of the broadcast shape) receives the result and is returned (written in place by kernels
    that take it, see :func:`_writes_in_place`; copied in otherwise), ``dtype`` (a floating type)
    is the result's type (the kernels compute in float64), a float comes back for all-scalar
    input, and pandas Series/DataFrames, xarray DataArrays and dask arrays come back as the
    container they came in (see :func:`_rewrap`).
    """
    result_dtype = None if dtype is None else _floating(dtype)
    values = [value for _, value, _ in args]
    kind = _kind_of(values)
    if kind == "numpy":
        return _compute(kernel, args, extra, species_argument, out, result_dtype)
    if out is not None:
        raise ValueError(
            f"out= takes a numpy array and numpy, Python or astropy arguments; with {kind} "
            "arguments, assign the returned result instead"
        )
    return _rewrap(kind, kernel, args, extra, species_argument, result_dtype)


def _compute(
    kernel: Callable[..., NDArray[np.float64]],
    args: list[tuple[str, Any, str]],
    extra: tuple[Any, ...],
    species_argument: str | None,
    out: Any,
    dtype: np.dtype[Any] | None,
) -> FloatOrArray:
    arrays = [
        to_si(value, name, unit, species_names=name == species_argument)
        for name, value, unit in args
    ]
    if out is not None:
        out = _output(out)
    try:
        shape = np.broadcast_shapes(*(a.shape for a in arrays))
    except ValueError as err:
        shapes = ", ".join(f"{name}{a.shape}" for (name, _, _), a in zip(args, arrays, strict=True))
        raise ValueError(f"arguments do not broadcast together: {shapes}") from err
    if out is not None:
        try:
            fits = np.broadcast_shapes(shape, out.shape) == out.shape
        except ValueError:
            fits = False
        if not fits:
            raise ValueError(f"out has shape {out.shape}; the arguments broadcast to {shape}")
        shape = out.shape
    count = int(np.prod(shape, dtype=np.int64))
    flat = [flat_for_kernel(a, shape) for a in arrays]
    if out is not None and _writes_in_place(kernel, out, dtype, flat):
        kernel(count, *flat, *extra, out.reshape(-1))  # a view: the kernel fills out's buffer
        return out
    result = kernel(count, *flat, *extra).reshape(shape)
    if dtype is not None:
        result = result.astype(dtype, copy=False)
    if out is not None:
        np.copyto(out, result, casting="same_kind")
        return out
    if shape == ():
        return float(result) if dtype is None or dtype == np.float64 else result[()]
    return result


def _writes_in_place(
    kernel: Callable[..., Any], out: NDArray[Any], dtype: np.dtype[Any] | None, flat: list[Any]
) -> bool:
    """True if ``kernel`` can fill ``out`` itself: a kernel that takes ``out`` (the core lists
    them), a C-contiguous, aligned float64 ``out`` with no other result type asked for, sharing
    no memory with an argument (the kernels read an element's arguments as they write, in
    blocks). Other outs get the result copied in, as numpy ufuncs do through their buffers."""
    return (
        getattr(kernel, "__name__", "") in _core.KERNELS_WRITING_OUT
        and out.dtype == np.float64
        and out.flags.c_contiguous
        and out.flags.aligned
        and (dtype is None or dtype == np.float64)
        and not any(np.may_share_memory(out, a) for a in flat)
    )


def _output(out: Any) -> NDArray[Any]:
    """``out`` as numpy ufuncs take it: a writeable float array, or a tuple of one."""
    if isinstance(out, tuple) and len(out) == 1:
        out = out[0]
    if not isinstance(out, np.ndarray):
        raise ValueError(f"out must be a numpy array, got {type(out).__name__}")
    if out.dtype.kind != "f":
        raise ValueError(f"out must be an array of floats, got dtype {out.dtype}")
    if not out.flags.writeable:
        raise ValueError("out must be writeable, got a read-only array")
    return out


def _rewrap(
    kind: str,
    kernel: Callable[..., NDArray[np.float64]],
    args: list[tuple[str, Any, str]],
    extra: tuple[Any, ...],
    species_argument: str | None,
    dtype: np.dtype[Any] | None,
) -> Any:
    """The result in the arguments' container: a pandas Series or DataFrame with their index
    (all pandas arguments must share it), an xarray DataArray broadcast by dimension names
    (xarray.apply_ufunc, lazy for dask-backed data), or a lazy dask array (map_blocks). Lazy
    results check their values when computed, not before."""
    names = [(name, unit) for name, _, unit in args]
    values = [value for _, value, _ in args]

    def block(*parts: Any) -> Any:
        given = [(name, part, unit) for (name, unit), part in zip(names, parts, strict=True)]
        return np.asarray(_compute(kernel, given, extra, species_argument, None, dtype))

    out_dtype = np.dtype(np.float64) if dtype is None else dtype
    if kind in ("xarray", "dask"):
        # The other arguments (numbers, species names, astropy quantities) are read once, here;
        # the blocks then hold plain numbers in SI.
        xr, da = _module("xarray"), _module("dask.array")
        lazy = (xr.DataArray,) if kind == "xarray" else (da.Array,)
        inputs = [
            v
            if isinstance(v, lazy)
            else to_si(v, name, unit, species_names=name == species_argument)
            for name, v, unit in args
        ]

        def si_block(*parts: Any) -> Any:
            given = [(name, part, unit) for (name, unit), part in zip(names, parts, strict=True)]
            return np.asarray(_compute(kernel, given, extra, None, None, dtype))

        if kind == "xarray":
            return xr.apply_ufunc(
                si_block, *inputs, dask="parallelized", output_dtypes=[out_dtype], keep_attrs=False
            )
        arrays = da.broadcast_arrays(*(da.asarray(v) for v in inputs))
        return da.map_blocks(si_block, *arrays, dtype=out_dtype)
    pd = _module("pandas")
    frames = [(name, v) for (name, _), v in zip(names, values, strict=True)]
    frames = [(name, v) for name, v in frames if isinstance(v, (pd.Series, pd.DataFrame))]
    first_name, first = frames[0]
    for name, other in frames[1:]:
        same = type(other) is type(first) and other.index.equals(first.index)
        if same and isinstance(first, pd.DataFrame):
            same = other.columns.equals(first.columns)
        if not same:
            raise ValueError(
                f"pandas arguments {first_name} and {name} must be of one kind (Series or "
                "DataFrame) with one index (and columns); align them first, e.g. with "
                ".align()"
            )
    plain = [v.to_numpy() if isinstance(v, (pd.Series, pd.DataFrame)) else v for v in values]
    result = np.asarray(block(*plain))
    if result.shape != first.shape:
        raise ValueError(
            f"the arguments broadcast to shape {result.shape}, not to the shape {first.shape} "
            f"of the pandas argument {first_name}"
        )
    if isinstance(first, pd.Series):
        labels = {v.name for _, v in frames}
        return pd.Series(result, index=first.index, name=labels.pop() if len(labels) == 1 else None)
    return pd.DataFrame(result, index=first.index, columns=first.columns)
