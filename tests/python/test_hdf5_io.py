"""Result files written by the C++ core, read back with h5py and xarray in the same process.

h5py wheels carry their own HDF5 library while the extension links the system one, so these
tests also check that the two coexist in one interpreter.
"""

import json
import os
import threading
from datetime import datetime, timedelta, timezone

import h5py
import numpy as np
import pytest
import xarray as xr

import exosieve
from exosieve.hdf5_io import (
    FileError,
    ResultAppender,
    ResultWriter,
    read_attribute,
    read_dimensions,
    read_doubles,
    read_int64s,
    read_int_attribute,
    read_strings,
)

SPECIES = ["H", "He", "O", "Ar-36", "H\u2082O"]
# Invented values; times up to 4.5 Gyr in seconds, far past the 292-year timedelta64 range.
TIME = np.array([0.0, 3.15576e13, 3.15576e16, 1.4200920e17])
FLUX = np.arange(len(SPECIES) * len(TIME), dtype=float).reshape(len(SPECIES), -1) * 1.1e11
FLUX[0, 0] = 5e-324  # subnormal
FLUX[1, 1] = -0.0
REGIME = np.array([np.iinfo(np.int64).min, -1, 0, 7, np.iinfo(np.int64).max])
CONFIG = {"planet": {"mass": 5.97e24, "radius": 6.4e6}, "note": "invented system \u03bb"}


def write_result(path):
    with ResultWriter(path, CONFIG) as w:
        w.add_coordinate("species", SPECIES, long_name="species name")
        w.add_coordinate("time", TIME, units="s", long_name="time since formation")
        w.add_variable("flux", ["species", "time"], FLUX, units="m-2 s-1", long_name="Jeans flux")
        w.add_variable("regime", ["species"], REGIME, units="1", long_name="escape regime code")
        w.add_variable("label", ["species"], [s + "!" for s in SPECIES], units="1", long_name="x")
        w.add_variable("total", [], np.float64(2.5e20), units="kg", long_name="mass lost")
        w.set_attribute("comment", "invented values", dataset="flux")


@pytest.fixture
def result(tmp_path):
    path = tmp_path / "result.h5"
    write_result(path)
    return path


def test_h5py_reads_values_bit_for_bit_and_the_layout(result):
    with h5py.File(result, "r") as f:
        assert f["flux"][...].tobytes() == FLUX.tobytes()
        assert f["time"].dtype == np.float64
        assert np.array_equal(f["regime"][...], REGIME)
        assert f["regime"].dtype == np.int64
        assert list(f["species"].asstr()[...]) == SPECIES
        assert h5py.check_string_dtype(f["species"].dtype).length is None  # variable length
        assert h5py.check_string_dtype(f["species"].dtype).encoding == "utf-8"
        assert f["total"].shape == ()
        # Dimension scales attached to the variable's axes.
        assert [d[0].name for d in f["flux"].dims] == ["/species", "/time"]
        for name in f:
            assert f[name].attrs["units"], name
            assert f[name].attrs["long_name"], name
        # Text attributes are fixed-length UTF-8 in the object header (no heap): h5py gives bytes.
        assert f["flux"].attrs["comment"].decode() == "invented values"
        assert json.loads(f.attrs["config"]) == CONFIG
        assert f.attrs["exosieve_version"].decode() == exosieve.__version__


def test_xarray_sees_named_dimensions_string_coordinates_and_float_time(result):
    with xr.open_dataset(result, engine="h5netcdf") as ds:
        ds.load()
    assert ds.flux.dims == ("species", "time")
    assert ds.regime.dims == ("species",)
    assert dict(ds.sizes) == {"species": len(SPECIES), "time": len(TIME)}
    assert ds.flux.sel(species="He").values.tobytes() == FLUX[1].tobytes()
    assert ds.regime.sel(species="H\u2082O").item() == REGIME[4]
    # Time in "s" stays float64 (units "seconds" would decode to timedelta64 and overflow).
    assert ds.time.dtype == np.float64
    assert np.array_equal(ds.time.values, TIME)
    for name in list(ds.variables):
        assert ds[name].attrs.get("units"), name
        assert ds[name].attrs.get("long_name"), name
    assert ds.time.attrs["units"] == "s"
    assert json.loads(ds.attrs["config"]) == CONFIG
    assert ds.attrs["exosieve_version"] == exosieve.__version__
    datetime.strptime(ds.attrs["created"], "%Y-%m-%dT%H:%M:%SZ")  # UTC, to the second


def test_created_is_the_utc_time_of_writing(tmp_path):
    # Bracketed by readings of the clock before and after: true however long the write takes.
    # The stamp is whole seconds of time(), which may lag the precise clock by a tick.
    before = datetime.now(timezone.utc).replace(tzinfo=None, microsecond=0) - timedelta(seconds=1)
    write_result(tmp_path / "stamped.h5")
    after = datetime.now(timezone.utc).replace(tzinfo=None)
    created = read_attribute(tmp_path / "stamped.h5", "", "created")
    assert before <= datetime.strptime(created, "%Y-%m-%dT%H:%M:%SZ") <= after


def test_core_readers_round_trip(result):
    assert read_doubles(result, "flux").tobytes() == FLUX.tobytes()
    assert read_doubles(result, "flux").shape == FLUX.shape
    assert np.array_equal(read_int64s(result, "regime"), REGIME)
    assert list(read_strings(result, "species")) == SPECIES
    assert read_doubles(result, "total").shape == ()
    assert read_dimensions(result, "flux") == ["species", "time"]
    assert read_attribute(result, "time", "units") == "s"
    assert json.loads(read_attribute(result, "/", "config")) == CONFIG


def test_time_unit_words_that_xarray_decodes_are_refused(tmp_path):
    w = ResultWriter(tmp_path / "t.h5", "{}")
    with pytest.raises(ValueError, match=r"units 'seconds' .* use \"s\""):
        w.add_coordinate("time", TIME, units="seconds", long_name="time")
    with pytest.raises(ValueError, match="datetimes"):
        w.add_coordinate("time", TIME, units="days since 2000-01-01", long_name="time")
    w.discard()
    assert os.listdir(tmp_path) == []


def test_bad_arguments_name_the_variable_and_the_numbers(tmp_path):
    w = ResultWriter(tmp_path / "bad.h5", "{}")
    w.add_coordinate("species", SPECIES, long_name="species name")
    w.add_coordinate("time", TIME, units="s", long_name="time")
    with pytest.raises(
        ValueError,
        match=r"'flux': data has shape \(4, 5\) but dimensions "
        r"\(species=5, time=4\) need \(5, 4\)",
    ):
        w.add_variable("flux", ["species", "time"], FLUX.T, units="m-2 s-1", long_name="flux")
    with pytest.raises(ValueError, match=r"unknown dimension 'specie' \(known: species, time\)"):
        w.add_variable("flux", ["specie"], FLUX[:, 0], units="m-2 s-1", long_name="flux")
    with pytest.raises(ValueError, match="unsupported dtype complex128"):
        w.add_variable("z", ["time"], TIME + 1j, units="1", long_name="z")
    with pytest.raises(ValueError, match="units are required"):
        w.add_coordinate("radius", [1.0], long_name="radius")
    with pytest.raises(exosieve.InputError, match="already exists"):
        w.add_coordinate("time", TIME, units="s", long_name="time")
    w.discard()


def test_an_exception_in_the_with_block_keeps_the_good_file(result):
    before = result.read_bytes()
    with pytest.raises(RuntimeError, match="simulated failure"):
        with ResultWriter(result, "{}") as w:
            w.add_coordinate("species", ["H"], long_name="species name")
            assert sorted(os.listdir(result.parent))[0].startswith(".result.h5.tmp-")
            raise RuntimeError("simulated failure")
    assert result.read_bytes() == before
    assert os.listdir(result.parent) == ["result.h5"]


def test_file_errors_are_oserrors_naming_the_path(tmp_path):
    plain = tmp_path / "plain.txt"
    plain.write_text("not HDF5\n")
    with pytest.raises(FileError, match=str(plain)) as caught:
        read_doubles(plain, "x")
    assert isinstance(caught.value, OSError)
    assert isinstance(caught.value, exosieve.ExosieveError)
    with pytest.raises(ValueError, match="does not exist"):
        read_doubles(tmp_path / "missing.h5", "x")


def make_schema(path):
    schema = ResultWriter(path, {"sweep": "test"})
    schema.add_coordinate("species", SPECIES, long_name="species name")
    schema.add_case_variable("flux", float, ["species"], units="m-2 s-1", long_name="Jeans flux")
    schema.add_case_variable("regime", np.int64, units="1", long_name="escape regime code")
    schema.add_case_variable("label", str, units="1", long_name="case label")
    return schema


def rows(first, count):
    r = np.arange(first, first + count)
    return {
        "flux": r[:, None] * 1e10 + np.arange(len(SPECIES)) / 3.0,
        "regime": r % 4,
        "label": np.array([f"case-{i}" for i in r]),
    }


def test_append_resume_and_read_with_xarray(tmp_path):
    path = tmp_path / "sweep.h5"
    with ResultAppender(make_schema(path)) as sweep:
        assert sweep.case_variables == ["case", "flux", "label", "regime"]
        assert sweep.row_shape("flux") == (len(SPECIES),)
        sweep.append(rows(0, 3))
        sweep.append(rows(3, 2))
        assert sweep.completed == 5
    with ResultAppender(path) as sweep:
        assert sweep.completed == 5
        assert sweep.discarded_rows == 0
        assert not sweep.repaired
        sweep.append(rows(5, 4))
    expected = rows(0, 9)
    with h5py.File(path, "r") as f:
        assert f["flux"].maxshape == (None, len(SPECIES))  # unlimited along case
        assert f.attrs["completed"] == 9
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        ds.load()
    assert ds.flux.dims == ("case", "species")
    assert ds.sizes["case"] == 9
    assert np.array_equal(ds.case.values, np.arange(9))
    assert ds.flux.values.tobytes() == expected["flux"].tobytes()
    assert np.array_equal(ds.flux.sel(species="He").values, expected["flux"][:, 1])
    assert np.array_equal(ds.regime.values, expected["regime"])
    assert list(ds.label.values) == list(expected["label"])
    assert ds.label.sel(case=4).item() == "case-4"
    for name in list(ds.variables):
        assert ds[name].attrs.get("units") and ds[name].attrs.get("long_name"), name
    assert ds.attrs["completed"] == 9
    assert json.loads(ds.attrs["config"]) == {"sweep": "test"}


def test_a_torn_block_written_by_another_hdf5_is_cut_off_on_resume(tmp_path):
    path = tmp_path / "sweep.h5"
    with ResultAppender(make_schema(path)) as sweep:
        sweep.append(rows(0, 6))
    # h5py (its own HDF5 library) leaves rows past `completed`, as an interrupted block would.
    with h5py.File(path, "r+") as f:
        for name in ("case", "flux", "regime", "label"):
            f[name].resize(10, axis=0)
        f["flux"][6:] = -1.0
    with ResultAppender(path) as sweep:
        assert sweep.completed == 6
        assert sweep.discarded_rows == 4
        sweep.append(rows(6, 1))
    assert read_int_attribute(path, "/", "completed") == 7
    assert read_doubles(path, "flux").tobytes() == rows(0, 7)["flux"].tobytes()
    assert list(read_strings(path, "label")) == list(rows(0, 7)["label"])


def test_malformed_blocks_are_refused(tmp_path):
    with ResultAppender(make_schema(tmp_path / "sweep.h5")) as sweep:
        block = rows(0, 3)
        block["flux"] = block["flux"][:, :2]
        with pytest.raises(
            ValueError,
            match=r"'flux' has shape \(3, 2\); each row must have "
            r"shape \(5,\)",
        ):
            sweep.append(block)
        block = rows(0, 3)
        block["regime"] = block["regime"][:2]
        with pytest.raises(ValueError, match="'regime' has 2 rows, 'flux' has 3"):
            sweep.append(block)
        block = rows(0, 3)
        block["regime"] = block["regime"] * 1.0
        with pytest.raises(ValueError, match="the file stores int64"):
            sweep.append(block)
        block = rows(0, 3)
        del block["label"]
        with pytest.raises(ValueError, match="lacks case variable 'label'"):
            sweep.append(block)
        with pytest.raises(ValueError, match="no case variable 'pressure'"):
            sweep.append({**rows(0, 1), "pressure": np.zeros(1)})
        assert sweep.completed == 0


def test_writers_in_two_threads(tmp_path):
    # The bindings release the GIL around HDF5 work; the thread-safe HDF5 serialises it.
    errors = []

    def work(i):
        try:
            for k in range(5):
                write_result(tmp_path / f"r{i}-{k}.h5")
        except Exception as e:  # reported below
            errors.append(e)

    threads = [threading.Thread(target=work, args=(i,)) for i in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    for name in sorted(os.listdir(tmp_path)):
        assert read_doubles(tmp_path / name, "flux").tobytes() == FLUX.tobytes()
    assert len(os.listdir(tmp_path)) == 10


def test_a_new_sweep_with_no_rows_opens_in_xarray(tmp_path):
    path = tmp_path / "sweep.h5"
    make_schema(path).commit()
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        assert ds.sizes["case"] == 0
        assert ds.flux.dims == ("case", "species")
    with ResultAppender(path) as sweep:
        assert sweep.completed == 0
        sweep.append(rows(0, 2))
    assert read_int_attribute(path, "/", "completed") == 2


def test_readers_accept_fixed_length_strings_from_other_writers(tmp_path):
    path = tmp_path / "other.h5"
    with h5py.File(path, "w") as f:
        f["names"] = np.array([b"He", b"Ar-36", b""], dtype="S5")
        f.attrs["title"] = np.bytes_(b"fixed")
        assert not f["names"].id.get_type().is_variable_str()
        assert not f.attrs.get_id("title").get_type().is_variable_str()
    assert list(read_strings(path, "names")) == ["He", "Ar-36", ""]
    assert read_attribute(path, "/", "title") == "fixed"
