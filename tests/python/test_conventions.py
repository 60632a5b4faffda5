"""The conventions the README promises, each tried as a user would: array functions that
broadcast and keep numpy's ``out=``/``dtype=`` and the container type of their input; result
files that say which conventions they follow and that xarray, h5py and pandas read as such."""

from __future__ import annotations

import json

import numpy as np
import pytest

import exosieve
from exosieve import _core
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
    "roche_lobe_factor": lambda x, **k: exosieve.roche_lobe_factor(x, **k),
    "lambert_w": lambda x, **k: exosieve.lambert_w(x, **k),
    "crossover_mass": lambda x, **k: exosieve.crossover_mass(H, x, 1e15, 1e21, 9.8, 0.9, **k),
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
    pd = pytest.importorskip("pandas")
    with pytest.raises(ValueError, match="out must be a numpy array, got Series"):
        f(T, "H", out=pd.Series(np.zeros(3)))
    with pytest.raises(ValueError, match="with pandas arguments, assign the returned result"):
        f(pd.Series(T), "H", out=np.zeros(3))
    readonly = np.zeros(3)
    readonly.flags.writeable = False
    with pytest.raises(ValueError, match="out must be writeable"):
        f(T, "H", out=readonly)
    with pytest.raises(ValueError, match="dtype must be a floating-point dtype, got int64"):
        f(T, "H", dtype=np.int64)


# The array functions whose kernels fill a C-contiguous float64 out themselves.
IN_PLACE = sorted(set(ARRAY_FUNCTIONS) & set(_core.KERNELS_WRITING_OUT))


def test_the_maxwell_and_jeans_functions_write_out_in_place():
    # Every public Maxwell and Jeans array function takes the in-place path.
    assert set(IN_PLACE) == {
        "most_probable_speed",
        "speed_pdf",
        "fraction_faster",
        "jeans_parameter",
        "jeans_flux",
        "log_jeans_escape_rate",
        "escape_speed",
    }


@pytest.mark.parametrize("name", IN_PLACE)
def test_out_is_written_in_place_without_a_copy(name, monkeypatch):
    function = ARRAY_FUNCTIONS[name]
    expected = function(T)
    out = np.full(3, np.nan)
    address = out.__array_interface__["data"][0]
    result = function(T, out=out)
    assert result is out
    assert result.__array_interface__["data"][0] == address  # the same buffer, not a new one
    assert np.shares_memory(result, out)
    np.testing.assert_array_equal(out, expected)  # bit for bit the allocated result
    # No temporary: with numpy's copy into out disabled the call still fills out (a 2-D out of
    # the broadcast shape too) ...
    import exosieve._arrays as arrays

    def no_copy(*args, **kwargs):
        raise AssertionError("out was filled through a copy")

    monkeypatch.setattr(arrays.np, "copyto", no_copy)
    grid = np.full((2, 3), np.nan)
    assert function(T, out=grid) is grid
    np.testing.assert_array_equal(grid, np.stack([expected, expected]))
    # ... while an out the kernel cannot fill itself goes through the copy, as for a ufunc.
    with pytest.raises(AssertionError, match="through a copy"):
        function(T, out=np.zeros(3, dtype=np.float32))


@pytest.mark.parametrize("name", IN_PLACE)
def test_outs_the_kernel_cannot_fill_still_behave_as_for_a_ufunc(name):
    function = ARRAY_FUNCTIONS[name]
    expected = function(T)
    strided = np.zeros(6)[::2]  # not contiguous: numpy ufuncs accept it
    assert function(T, out=strided) is strided
    np.testing.assert_array_equal(strided, expected)
    fortran = np.zeros((2, 3), order="F")  # contiguous, but in Fortran order
    assert not fortran.flags.c_contiguous
    assert function(T, out=fortran) is fortran
    np.testing.assert_array_equal(fortran, np.stack([expected, expected]))
    # An out that is also an argument is computed first, then copied in.
    temperatures = T.copy()
    if name in ("most_probable_speed", "jeans_parameter"):  # T is their first argument
        assert function(temperatures, out=temperatures) is temperatures
        np.testing.assert_array_equal(temperatures, expected)


def test_the_kernels_refuse_an_out_they_cannot_fill_naming_it():
    # The binding is what takes a mutable array: it never converts one (results written into
    # a converted copy would be lost), it refuses it with the package's ValueError.
    count, temperature, mass = 3, T, np.array([H])
    cases = [
        (np.zeros(3, dtype=np.float32), "out must be a float64 array .* got dtype float32"),
        (np.zeros(3, dtype=np.int64), "out must be a float64 array .* got dtype int64"),
        (np.zeros(6)[::2], r"out must be C-contiguous .* got shape \(3,\) with strides \(16,\)"),
        (np.zeros(4), r"out must hold 3 values, got shape \(4,\)"),
        ([0.0, 0.0, 0.0], "out must be a numpy array, got list"),
    ]
    readonly = np.zeros(3)
    readonly.flags.writeable = False
    cases.append((readonly, "out must be writeable, got a read-only array"))
    for out, message in cases:
        with pytest.raises(ValueError, match=message) as caught:
            _core.most_probable_speed(count, temperature, mass, out)
        assert isinstance(caught.value, exosieve.InputError)
    tail = _core.TailDepletion()
    with pytest.raises(ValueError, match="out must hold 3 values, got shape \\(2,\\)"):
        _core.jeans_flux(
            count,
            np.array([1e12]),
            T,
            mass,
            np.array([M_EARTH]),
            np.array([R_EARTH]),
            tail,
            np.zeros(2),
        )
    # A good out is filled and returned, the same object.
    out = np.zeros(3)
    assert _core.most_probable_speed(count, temperature, mass, out) is out
    np.testing.assert_array_equal(out, exosieve.most_probable_speed(T, "H"))


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


# --- result files: Conventions, CF attributes, case names as the case coordinate ---------------

SWEEP_HEADER = (
    "case,planet_mass [M_earth],planet_mass_sigma [M_earth],planet_radius [R_earth],"
    "exobase_altitude [km],exobase_density [m-3],exobase_temperature [K],inventory [particles],"
    "x_N2,x_He,x_H,exobase_composition"
)


def _sweep_file(tmp_path, samples=3):
    """A sweep of four invented Earth-like planets (one name used twice) and its result."""
    rows = [
        "Vesk b,1.0,0.1,1.0,500,1e13,900,1e37,0.7,0.25,0.05,bulk",
        "Vesk c,0.6,0.05,0.9,500,1e13,1500,1e37,0.7,0.25,0.05,bulk",
        "Ondra,2.0,0.2,1.3,500,1e13,1200,1e37,0.7,0.25,0.05,bulk",
        "Ondra,0.8,0.1,1.0,500,1e13,2500,1e37,0.7,0.25,0.05,bulk",
    ]
    cases = tmp_path / "cases.csv"
    cases.write_text("\n".join([SWEEP_HEADER, *rows]) + "\n")
    out = tmp_path / "sweep.h5"
    result = exosieve.compare(
        cases, output=out, samples=samples, threads=1, t_start=1e15, t_end=1e17, times=4
    )
    return out, result


def _evolution_file(tmp_path):
    planet = exosieve.Planet(M_EARTH, R_EARTH)  # invented: an Earth-sized planet
    exobase = exosieve.PrescribedExobase(R_EARTH + 5e5, 1500.0, {"H": 1e11, "D": 1e7, "O": 1e13})
    run = exosieve.evolve(planet, exobase, {"H": 1e35, "D": 1e31, "O": 1e40}, (1e15, 1e17))
    path = tmp_path / "run.h5"
    run.to_hdf5(path)
    return path, run


CF_MEANING = r"^[A-Za-z0-9_.+@-]+( [A-Za-z0-9_.+@-]+)*$"  # CF 1.8 section 3.5 characters


def _check_flags(variable, expected_meanings):
    # CF 1.8 conformance, 3.5 Flags: flag_values of the variable's type, as many blank-separated
    # words in flag_meanings, mutually exclusive values.
    import re

    values, meanings = variable.attrs["flag_values"], variable.attrs["flag_meanings"]
    meanings = meanings.decode() if isinstance(meanings, bytes) else meanings
    assert isinstance(values, np.ndarray) and values.dtype == variable.dtype, values
    assert re.match(CF_MEANING, meanings)
    assert meanings.split() == expected_meanings
    assert len(set(values.tolist())) == len(values) == len(expected_meanings)
    assert set(np.unique(variable[...])) <= set(values.tolist())


def test_both_result_files_name_their_conventions_and_flag_their_regimes(tmp_path):
    h5py = pytest.importorskip("h5py")
    sweep, _ = _sweep_file(tmp_path)
    run, _ = _evolution_file(tmp_path)
    with h5py.File(sweep, "r", locking=False) as f, h5py.File(run, "r", locking=False) as g:
        for file in (f, g):
            # text attributes are fixed-length UTF-8 strings, which h5py gives as bytes
            assert file.attrs["Conventions"].decode() == "exosieve-1"
        assert exosieve._core.RESULT_FILE_CONVENTIONS == "exosieve-1"
        _check_flags(g["regime"], list(exosieve.REGIMES))
        _check_flags(f["regime_start"], ["none", *exosieve.REGIMES])
        assert g["regime"].attrs["flag_values"].tolist() == [0, 1, 2, 3]
        assert f["regime_start"].attrs["flag_values"].tolist() == [-1, 0, 1, 2, 3]


def _every_dataset(file):
    return {name: file[name] for name in file if hasattr(file[name], "dtype")}


def test_every_unit_string_of_both_files_is_one_udunits_reads(tmp_path):
    # CF 3.1: units must be recognisable by UDUNITS. The reference: cf-units, the UDUNITS-2
    # library's Python interface (test extra).
    h5py = pytest.importorskip("h5py")
    cf_units = pytest.importorskip("cf_units")
    sweep, _ = _sweep_file(tmp_path)
    run, _ = _evolution_file(tmp_path)
    seen = set()
    for path in (sweep, run):
        with h5py.File(path, "r", locking=False) as f:
            for name, dataset in _every_dataset(f).items():
                units = dataset.attrs["units"]
                units = units.decode() if isinstance(units, bytes) else units
                if name.lstrip("/") == "sample_input":  # one unit per input (README)
                    assert "input_unit" in units and "input_unit" in f
                    continue
                assert cf_units.Unit(units).is_udunits(), (path.name, name, units)
                assert dataset.attrs["long_name"], (path.name, name)
                seen.add(units)
    assert {"1", "kg", "m", "s", "K", "m s-1", "s-1", "W m-2"} <= seen
    with pytest.raises(ValueError):  # the check can fail: a word UDUNITS does not know
        cf_units.Unit("particles")


def test_dimension_scales_and_what_is_not_cf(tmp_path):
    h5py = pytest.importorskip("h5py")
    sweep, _ = _sweep_file(tmp_path)
    run, _ = _evolution_file(tmp_path)
    with h5py.File(run, "r") as g:
        for coordinate in ("time", "species", "ratio"):
            assert g[coordinate].is_scale, coordinate
        assert h5py.check_string_dtype(g["ratio"].dtype) is not None
        assert [r.decode() for r in g["ratio"][...]] == ["D/H"]
        assert np.all(np.diff(g["time"][...]) > 0)
        assert g["time"].attrs["units"].decode() == "s"  # an age: no "since <date>"
    with h5py.File(sweep, "r", locking=False) as f:
        for coordinate in ("case", "species", "time", "sample"):
            assert f[coordinate].is_scale, coordinate
        for name, dataset in _every_dataset(f).items():
            if not dataset.is_scale:
                # Every variable runs by case, but the units of the uncertain inputs.
                first = "/input" if name.lstrip("/") == "input_unit" else "/case"
                assert dataset.dims[0][0].name == first, name
        # Numeric coordinates are strictly monotonic, as CF asks of coordinate variables.
        assert np.all(np.diff(f["time"][...]) > 0) and np.all(np.diff(f["sample"][...]) > 0)
        # The departure from CF the README names: string-valued coordinate variables.
        assert h5py.check_string_dtype(f["species"].dtype) is not None
        assert h5py.check_string_dtype(f["case"].dtype) is not None


def test_cases_are_selected_by_name_in_xarray(tmp_path):
    xr = pytest.importorskip("xarray")
    out, result = _sweep_file(tmp_path)
    with xr.open_dataset(out, engine="h5netcdf", driver_kwds={"locking": False}) as ds:
        assert list(ds.case.values) == ["Vesk b", "Vesk c", "Ondra", "Ondra"]
        one = ds.sel(case="Vesk c")
        assert int(one.row) == 1
        left = one.final_retained_fraction.sel(species="He").item()
        assert (
            left
            == result.summary.set_index(["case", "species"]).loc[("Vesk c", "He")][
                "final_retained_fraction"
            ]
        )
        twice = ds.sel(case="Ondra")  # a repeated name selects every row that has it
        assert twice.sizes["case"] == 2 and twice.row.values.tolist() == [2, 3]
        assert ds.regime_start.attrs["flag_meanings"].split()[0] == "none"


def test_to_xarray_is_the_file_as_xarray_opens_it(tmp_path):
    xr = pytest.importorskip("xarray")
    out, result = _sweep_file(tmp_path)
    for comparison in (result, exosieve.open_comparison(out)):
        mine = comparison.to_xarray()
        with xr.open_dataset(out, engine="h5netcdf", driver_kwds={"locking": False}) as ds:
            assert set(mine.variables) == set(ds.variables)
            assert set(mine.coords) == set(ds.coords)
            for name in ds.variables:
                a, b = mine[name], ds[name]
                assert a.dims == b.dims, name
                if a.dtype.kind == "f":
                    np.testing.assert_array_equal(a.values, b.values)
                else:
                    assert a.values.tolist() == b.values.tolist(), name
                assert set(a.attrs) == set(b.attrs), name
                for key in a.attrs:
                    assert np.array_equal(np.asarray(a.attrs[key]), np.asarray(b.attrs[key])), (
                        name,
                        key,
                    )
            assert mine.attrs["Conventions"] == ds.attrs["Conventions"]
            assert json.loads(mine.attrs["config"]) == json.loads(ds.attrs["config"])
    # In memory too, without any file.
    memory = exosieve.compare(
        tmp_path / "cases.csv", samples=0, threads=1, t_start=1e15, t_end=1e17, times=4
    ).to_xarray()
    assert memory.sel(case="Vesk b").sizes == {"species": 3, "time": 4}
    assert "sample" not in memory.dims


def test_evolution_to_pandas_carries_units_and_to_xarray_its_flags(tmp_path):
    xr = pytest.importorskip("xarray")
    path, run = _evolution_file(tmp_path)
    frame = run.to_pandas()
    units = frame.attrs["units"]
    assert units["time"] == "s" and units["escape_rate"] == "s-1" and units["regime"] == "1"
    assert set(units) == {"time", *frame.columns.get_level_values("quantity")}
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        for quantity in set(units) - {"time"}:
            assert ds[quantity].attrs["units"] == units[quantity], quantity
            assert ds[quantity].attrs["long_name"] == frame.attrs["long_names"][quantity]
        mine = run.to_xarray()
        for key in ("flag_values", "flag_meanings"):
            assert np.array_equal(
                np.asarray(mine.regime.attrs[key]), np.asarray(ds.regime.attrs[key])
            )
        assert mine.attrs["Conventions"] == ds.attrs["Conventions"] == "exosieve-1"
    pd = pytest.importorskip("pandas")
    # pandas keeps attrs through a selection and arithmetic, and drops them where frames with
    # different attrs are combined.
    assert frame["escape_rate"].attrs["units"]["escape_rate"] == "s-1"
    assert (2 * frame).attrs["units"] == units
    other = frame.copy()
    other.attrs = {}
    assert pd.concat([frame, other]).attrs == {}


def test_a_sweep_file_of_an_earlier_layout_is_refused_with_what_to_do(tmp_path):
    h5py = pytest.importorskip("h5py")
    out, _ = _sweep_file(tmp_path)
    with h5py.File(out, "r+") as f:
        del f.attrs["Conventions"]  # as files written before the case names were coordinates
    with pytest.raises(ValueError, match="earlier layout .*run the sweep again"):
        exosieve.open_comparison(out)
    cases = tmp_path / "cases.csv"
    options = {"samples": 3, "threads": 1, "t_start": 1e15, "t_end": 1e17, "times": 4}
    with pytest.raises(ValueError, match="earlier layout"):
        exosieve.compare(cases, output=out, **options)  # would resume it
    again = exosieve.compare(cases, output=out, overwrite=True, **options)
    assert again.cases == ["Vesk b", "Vesk c", "Ondra", "Ondra"]


def test_regime_thresholds_are_accepted_in_both_forms_everywhere(tmp_path):
    planet = exosieve.Planet(M_EARTH, R_EARTH)  # invented: an Earth-sized planet
    exobase = exosieve.PrescribedExobase(R_EARTH + 5e5, 1500.0, {"H": 1e11, "O": 1e13})
    args = (planet, exobase, {"H": 1e35, "O": 1e40}, (1e15, 1e17))
    by_class = exosieve.evolve(*args, thresholds=exosieve.RegimeThresholds(8.0, 4.0, 2.5))
    by_tuple = exosieve.evolve(*args, thresholds=(8.0, 4.0, 2.5))
    assert by_class.regime.tolist() == by_tuple.regime.tolist()
    assert json.loads(by_tuple.config_json)["regime_thresholds"]["enhanced"] == 8.0
    rows = ["Ondra,1.0,0.1,1.0,500,1e13,1500,1e37,0.7,0.25,0.05,bulk"]
    cases = tmp_path / "cases.csv"
    cases.write_text("\n".join([SWEEP_HEADER, *rows]) + "\n")
    runs = [
        exosieve.compare(cases, threads=1, t_start=1e15, t_end=1e17, times=4, thresholds=t)
        for t in ((8.0, 4.0, 2.5), exosieve.RegimeThresholds(8.0, 4.0, 2.5))
    ]
    assert runs[0].config["options"] == runs[1].config["options"]
    np.testing.assert_array_equal(runs[0]["regime_start"], runs[1]["regime_start"])
    for call in (
        lambda t: exosieve.evolve(*args, thresholds=t),
        lambda t: exosieve.compare(cases, threads=1, thresholds=t),
    ):
        with pytest.raises(
            ValueError, match=r"thresholds must be an exosieve.RegimeThresholds .*got 2.1"
        ):
            call(2.1)
        with pytest.raises(ValueError, match=r"thresholds must be .*got \(6.0, 3.0\)"):
            call((6.0, 3.0))
