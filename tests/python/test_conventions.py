"""The conventions the README promises, each tried as a user would: array functions that
broadcast and keep numpy's ``out=``/``dtype=`` and the container type of their input; result
files that say which conventions they follow and that xarray, h5py and pandas read as such."""

from __future__ import annotations

import numpy as np
import pytest

import exosieve
from exosieve.constants import AMU, AU, M_EARTH, M_SUN, R_EARTH

H = exosieve.species("H").mass

# --- the hydrodynamic helpers broadcast like every array function -------------------------------

HELPERS = {
    # name: (function, arguments as arrays of three invented planets or single values)
    "roche_lobe_ratio": (
        exosieve.roche_lobe_ratio,
        ([0.5 * M_EARTH, M_EARTH, 5 * M_EARTH], M_SUN, [0.5 * AU, AU, 0.05 * AU], R_EARTH),
    ),
    "energy_limited_mass_loss": (
        exosieve.energy_limited_mass_loss,
        (
            0.15,
            [R_EARTH, 2 * R_EARTH, 3 * R_EARTH],
            1.2 * R_EARTH,
            [1.0, 10.0, 100.0],
            M_EARTH,
            0.8,
        ),
    ),
    "crossover_mass": (
        exosieve.crossover_mass,
        (H, [500.0, 1000.0, 2000.0], [1e14, 1e15, 1e16], 1e21, 9.8, 0.9),
    ),
    "dragged_flux": (
        exosieve.dragged_flux,
        ([2 * AMU, 4 * AMU, 40 * AMU], 0.05, H, 1e16, 0.9, [10 * AMU, 10 * AMU, 30 * AMU]),
    ),
}


@pytest.mark.parametrize("name", sorted(HELPERS))
def test_hydrodynamic_helpers_broadcast_to_their_scalar_values(name):
    function, args = HELPERS[name]
    result = function(*args)
    assert isinstance(result, np.ndarray) and result.shape == (3,)
    for k in range(3):
        scalar = function(*(a[k] if isinstance(a, list) else a for a in args))
        assert isinstance(scalar, float)
        assert result[k] == scalar  # the same C++ formula, element by element
    # Broadcasting over two axes, as numpy does: (2, 1) against (3,) gives (2, 3).
    first = np.asarray(args[0] if isinstance(args[0], list) else [args[0]] * 3)
    column = np.stack([first, first])[:, :1]
    grid = function(column, *args[1:])
    assert grid.shape == (2, 3)
    np.testing.assert_array_equal(grid[1], function(first[0], *args[1:]))


def test_a_bad_element_of_a_helper_is_named_with_its_index():
    with pytest.raises(ValueError, match=r"efficiency must be <= 1, got 1.5 \(element 1\)"):
        exosieve.energy_limited_mass_loss([0.1, 1.5], R_EARTH, R_EARTH, 1.0, M_EARTH)
    with pytest.raises(ValueError, match="arguments do not broadcast together"):
        exosieve.crossover_mass(H, [1.0, 2.0], [1.0, 2.0, 3.0], 1e21, 9.8, 0.5)


# --- array functions behave as numpy ufuncs do: out=, dtype=, containers -----------------------

T = np.array([300.0, 1000.0, 2000.0])  # [K]
# Every public array function, with valid arguments whose first one is an array over T.
ARRAY_FUNCTIONS = {
    "most_probable_speed": lambda x, **k: exosieve.most_probable_speed(x, "H", **k),
    "speed_pdf": lambda x, **k: exosieve.speed_pdf(3e3, x, "H", **k),
    "fraction_faster": lambda x, **k: exosieve.fraction_faster(11.2e3, x, "H", **k),
    "jeans_parameter": lambda x, **k: exosieve.jeans_parameter(x, "H", M_EARTH, R_EARTH, **k),
    "jeans_flux": lambda x, **k: exosieve.jeans_flux(1e12, x, "He", M_EARTH, R_EARTH, **k),
    "log_jeans_escape_rate": lambda x, **k: exosieve.log_jeans_escape_rate(
        1e12, x, "O", M_EARTH, R_EARTH, **k
    ),
    "escape_speed": lambda x, **k: exosieve.escape_speed(M_EARTH, x * 1e4, **k),
    "energy_limited_mass_loss": lambda x, **k: exosieve.energy_limited_mass_loss(
        0.15, R_EARTH, R_EARTH, x / 100, M_EARTH, **k
    ),
    "sonic_radius": lambda x, **k: exosieve.sonic_radius(x, 2.3 * AMU, M_EARTH, **k),
    "binary_diffusion_parameter": lambda x, **k: exosieve.binary_diffusion_parameter(
        "H", "N2", x, **k
    ),
    "core_radius": lambda x, **k: exosieve.core_radius(x * 1e22, **k),
}


@pytest.mark.parametrize("name", sorted(ARRAY_FUNCTIONS))
def test_out_receives_the_result_and_is_returned(name):
    function = ARRAY_FUNCTIONS[name]
    expected = function(T)
    out = np.full(3, np.nan)
    assert function(T, out=out) is out  # as np.add(a, b, out=out) returns out
    np.testing.assert_array_equal(out, expected)
    # A float32 out takes the float64 result cast as numpy's same_kind casting does.
    out32 = np.zeros(3, dtype=np.float32)
    function(T, out=out32)
    np.testing.assert_array_equal(out32, expected.astype(np.float32))
    # out may be larger than the arguments' shape, as long as they broadcast to it.
    grid = np.zeros((2, 3))
    function(T, out=grid)
    np.testing.assert_array_equal(grid, np.stack([expected, expected]))


def test_out_and_dtype_are_refused_where_numpy_refuses_them():
    f = exosieve.most_probable_speed
    # numpy refuses the same: an int out (casting), a shape the arguments do not fill.
    with pytest.raises(TypeError):
        np.add(T, 1.0, out=np.zeros(3, dtype=np.int64))
    with pytest.raises(ValueError, match="out must be an array of floats, got dtype int64"):
        f(T, "H", out=np.zeros(3, dtype=np.int64))
    with pytest.raises(ValueError):
        np.add(T, 1.0, out=np.zeros(2))
    with pytest.raises(ValueError, match=r"out has shape \(2,\); the arguments broadcast to"):
        f(T, "H", out=np.zeros(2))
    with pytest.raises(ValueError, match="out must be a numpy array, got list"):
        f(T, "H", out=[0.0, 0.0, 0.0])
    readonly = np.zeros(3)
    readonly.flags.writeable = False
    with pytest.raises(ValueError, match="out must be writeable"):
        f(T, "H", out=readonly)
    with pytest.raises(ValueError, match="dtype must be a floating-point dtype, got int64"):
        f(T, "H", dtype=np.int64)


@pytest.mark.parametrize("name", sorted(ARRAY_FUNCTIONS))
def test_dtype_sets_the_result_type_as_for_a_ufunc(name):
    function = ARRAY_FUNCTIONS[name]
    expected = function(T)
    for dtype in (np.float32, np.float64, np.longdouble):
        result = function(T, dtype=dtype)
        assert result.dtype == np.dtype(dtype)
        assert result.dtype == np.add(T, 0.0, dtype=dtype).dtype  # numpy's own answer
        np.testing.assert_array_equal(result, expected.astype(dtype))
    scalar = function(T[1], dtype=np.float32)
    assert type(scalar) is np.float32 and type(np.add(1.0, 0.0, dtype=np.float32)) is np.float32
    assert type(function(T[1])) is float  # the documented float for scalar input


@pytest.mark.parametrize("name", sorted(ARRAY_FUNCTIONS))
def test_pandas_series_and_frames_keep_their_type_and_index(name):
    pd = pytest.importorskip("pandas")
    function = ARRAY_FUNCTIONS[name]
    series = pd.Series(T, index=pd.Index(["cold", "warm", "hot"], name="case"), name="T")
    result = function(series)
    assert type(result) is type(np.add(series, 0.0)) is pd.Series
    assert result.index.equals(series.index) and result.name == "T"
    np.testing.assert_array_equal(result.to_numpy(), function(T))
    frame = pd.DataFrame({"a": T, "b": T[::-1]}, index=series.index)
    table = function(frame)
    assert type(table) is type(np.add(frame, 0.0)) is pd.DataFrame
    assert table.columns.equals(frame.columns) and table.index.equals(frame.index)
    np.testing.assert_array_equal(table["b"].to_numpy(), function(T[::-1]))


def test_pandas_arguments_with_different_indexes_are_refused_not_misaligned():
    pd = pytest.importorskip("pandas")
    t = pd.Series(T, index=["a", "b", "c"])
    m = pd.Series([H, 2 * H, 4 * H], index=["c", "b", "a"])
    with pytest.raises(ValueError, match="temperature and mass must be of one kind"):
        exosieve.most_probable_speed(t, m)
    same = exosieve.most_probable_speed(t, m.reindex(t.index))  # aligned first: fine
    assert same["a"] == exosieve.most_probable_speed(300.0, 4 * H)


@pytest.mark.parametrize("name", sorted(ARRAY_FUNCTIONS))
def test_xarray_dataarrays_keep_their_type_and_broadcast_by_dimension_name(name):
    xr = pytest.importorskip("xarray")
    function = ARRAY_FUNCTIONS[name]
    temperature = xr.DataArray(
        T, dims="case", coords={"case": ["cold", "warm", "hot"]}, attrs={"units": "K"}
    )
    result = function(temperature)
    assert type(result) is type(np.add(temperature, 0.0)) is xr.DataArray
    assert result.dims == ("case",) and list(result.case.values) == ["cold", "warm", "hot"]
    assert "units" not in result.attrs  # the input's unit is not the result's
    np.testing.assert_array_equal(result.sel(case="hot").item(), function(T)[2])


def test_xarray_broadcasts_by_name_and_reads_species_and_quantities():
    xr = pytest.importorskip("xarray")
    u = pytest.importorskip("astropy.units")
    temperature = xr.DataArray(T, dims="case")
    mass = xr.DataArray([H, 4 * H], dims="species")
    grid = exosieve.most_probable_speed(temperature, mass)
    assert grid.dims == ("case", "species")  # as temperature * mass would be
    assert grid.dims == (temperature * mass).dims
    np.testing.assert_array_equal(
        grid.values, exosieve.most_probable_speed(T[:, None], np.array([H, 4 * H]))
    )
    # Names and quantities beside a DataArray are read as in the numpy case.
    named = exosieve.most_probable_speed(temperature, "He")
    np.testing.assert_array_equal(named.values, exosieve.most_probable_speed(T, "He"))
    celsius = exosieve.most_probable_speed(xr.DataArray(T, dims="case"), 4.0026 * u.u)
    assert celsius.dims == ("case",)


def test_dask_arrays_stay_lazy_and_compute_to_the_numpy_result():
    da = pytest.importorskip("dask.array")
    xr = pytest.importorskip("xarray")
    lazy = da.from_array(np.linspace(300.0, 2000.0, 10), chunks=4)
    result = exosieve.jeans_flux(1e12, lazy, "He", M_EARTH, R_EARTH)
    assert type(result) is type(np.add(lazy, 0.0)) is da.Array
    assert result.chunks == lazy.chunks
    np.testing.assert_array_equal(
        result.compute(),
        exosieve.jeans_flux(1e12, np.linspace(300.0, 2000.0, 10), "He", M_EARTH, R_EARTH),
    )
    # Broadcasting against a numpy argument, as dask's own ufuncs do.
    grid = exosieve.most_probable_speed(lazy[:, None], np.array([H, 4 * H]))
    assert grid.shape == (10, 2) and type(grid) is da.Array
    # A dask-backed DataArray stays lazy too.
    chunked = xr.DataArray(np.asarray(lazy), dims="case").chunk({"case": 5})
    speed = exosieve.most_probable_speed(chunked, "H")
    assert isinstance(speed.data, da.Array)
    np.testing.assert_array_equal(speed.values, exosieve.most_probable_speed(np.asarray(lazy), "H"))
    # Lazy values are checked when computed: the error names the argument then.
    bad = exosieve.most_probable_speed(da.from_array(np.array([300.0, -1.0]), chunks=1), "H")
    with pytest.raises(ValueError, match="temperature must be finite and > 0"):
        bad.compute()
    with pytest.raises(ValueError, match="with dask arguments, assign the returned result"):
        exosieve.most_probable_speed(lazy, "H", out=np.zeros(10))
