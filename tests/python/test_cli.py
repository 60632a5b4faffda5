"""The command line: the demo runs, prints a table and writes a file xarray opens."""

import numpy as np
import pytest

import exosieve
from exosieve.catalogue import demo_catalogue_path, read_case_table
from exosieve.cli import main

xr = pytest.importorskip("xarray")


def test_demo_writes_table_and_file(tmp_path, capsys):
    out = tmp_path / "demo.h5"
    assert main(["demo", "--output", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "Sefir b" in printed and "lambda [1]" in printed and str(out.resolve()) in printed
    table = read_case_table(demo_catalogue_path())
    with xr.open_dataset(out, engine="h5netcdf") as ds:
        assert list(ds.case_name.values) == table.names
        for name in ds.data_vars:
            assert ds[name].attrs["units"] and ds[name].attrs["long_name"], name
        # Same numbers as a direct call for one case and species (Sefir b, He).
        row = table.names.index("Sefir b")
        n = table.column("exobase_density")[row] * table.column("x_He")[row]
        r = table.column("planet_radius")[row] + table.column("exobase_altitude")[row]
        expected = exosieve.jeans_flux(
            n, table.column("exobase_temperature")[row], "He", table.column("planet_mass")[row], r
        )
        assert ds.jeans_flux.isel(case=row).sel(species="He").item() == pytest.approx(expected)
        # Absent species are NaN, not zero.
        assert np.isnan(ds.jeans_flux.isel(case=row).sel(species="H2").item())


def test_bad_case_table_names_line_and_column(tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text("case,planet_mass [M_earth]\nA,1.0\nB,heavy\n")
    with pytest.raises(ValueError, match=r"bad.csv line 3 column 'planet_mass': 'heavy' is not"):
        read_case_table(bad)
    bad.write_text("case,planet_mass [stone]\nA,1.0\n")
    with pytest.raises(ValueError, match="unknown unit 'stone'"):
        read_case_table(bad)
