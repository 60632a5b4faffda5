"""The command line: the demo runs, prints a table and writes a file xarray opens."""

import os
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import exosieve
from exosieve.batch import open_comparison
from exosieve.catalogue import demo_catalogue_path, read_case_table
from exosieve.cli import main
from exosieve.demo import snapshot

xr = pytest.importorskip("xarray")
pd = pytest.importorskip("pandas")


def test_demo_writes_table_file_and_chart(tmp_path, capsys):
    out, chart = tmp_path / "demo.h5", tmp_path / "demo.png"
    argv = ["demo", "--output", str(out), "--chart", str(chart), "--samples", "10"]
    assert main(argv) == 0
    printed = capsys.readouterr().out
    assert "Sefir b" in printed and "lambda [1]" in printed
    assert str(out.resolve()) in printed and str(chart.resolve()) in printed
    assert chart.stat().st_size > 10_000
    table = read_case_table(demo_catalogue_path())
    with xr.open_dataset(out, engine="h5netcdf") as ds:
        assert list(ds.case.values) == table.names
        assert ds.sizes["sample"] == 10
        for name in ds.data_vars:
            assert "units" in ds[name].attrs and ds[name].attrs["long_name"], name
        fraction = ds.final_retained_fraction.values
        present = ds.mole_fraction.values > 0
        # Retained fractions lie in [0, 1] up to the integration tolerance.
        assert np.all((fraction[present] >= 0) & (fraction[present] <= 1 + 1e-9))


def test_demo_snapshot_matches_direct_calls():
    # The printed table's numbers are the kernel's: Sefir b (a prescribed exobase of its own
    # composition), helium at its exobase fraction of the exobase density.
    result = snapshot(exosieve.compare(demo_catalogue_path(), times=4))
    table = read_case_table(demo_catalogue_path())
    row = table.names.index("Sefir b")
    n = table.column("exobase_density")[row] * table.column("exobase_x_He")[row]
    r = table.column("planet_radius")[row] + table.column("exobase_altitude")[row]
    expected = exosieve.jeans_flux(
        n, table.column("exobase_temperature")[row], "He", table.column("planet_mass")[row], r
    )
    assert result.jeans_flux[row, result.species.index("He")] == pytest.approx(expected, rel=1e-12)
    # Absent species are NaN, not zero.
    assert np.isnan(result.jeans_flux[row, result.species.index("H2")])


def test_bad_case_table_names_line_and_column(tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text("case,planet_mass [M_earth]\nA,1.0\nB,heavy\n")
    with pytest.raises(ValueError, match=r"bad.csv line 3 column 'planet_mass': 'heavy' is not"):
        read_case_table(bad)
    bad.write_text("case,planet_mass [stone]\nA,1.0\n")
    with pytest.raises(ValueError, match="unknown unit 'stone'"):
        read_case_table(bad)


# --- sweeps ------------------------------------------------------------------------------------

SWEEP_HEADER = (
    "case,planet_mass [M_earth],planet_mass_sigma [M_earth],planet_radius [R_earth],"
    "exobase_altitude [km],exobase_density [m-3],exobase_temperature [K],"
    "exobase_temperature_lnsigma [1],inventory [particles],x_N2,x_He,x_H,"
    "exobase_composition"
)


def sweep_table(tmp_path, n):
    lines = [SWEEP_HEADER]
    for i in range(n):
        mass, temperature = 0.6 + 0.1 * (i % 6), 800 + 120 * (i % 7)
        lines.append(
            f"P{i},{mass},{0.1 * mass},1.0,500,1e13,{temperature},0.15,1e37,0.7,0.25,0.05,bulk"
        )
    path = tmp_path / "cases.csv"
    path.write_text("\n".join(lines) + "\n")
    return path


def test_every_command_explains_its_options_with_units(capsys):
    for command, words in [
        ("sweep", ["(s, yr, Myr, Gyr)", "--scheduler", "--samples", "resume"]),
        ("summary", ["[1]", "--retain", "[%]"]),
        ("chart", ["[km/s]", "[K]", "--output"]),
        ("columns", ["unit"]),
        ("demo", ["--output"]),
    ]:
        with pytest.raises(SystemExit):
            main([command, "--help"])
        text = " ".join(capsys.readouterr().out.split())  # help text as one line
        for word in words:
            assert word in text, (command, word)


def test_sweep_summary_chart_and_columns(tmp_path, capsys):
    table = sweep_table(tmp_path, 6)
    out = tmp_path / "sweep.h5"
    assert (
        main(["sweep", str(table), "-o", str(out), "--samples", "4", "--threads", "1", "--quiet"])
        == 0
    )
    assert f"wrote {out.resolve()}: 6 cases, 0 failed" in capsys.readouterr().out
    csv = tmp_path / "summary.csv"
    assert main(["summary", str(out), "--retain", "0.3", "--species", "He", "--csv", str(csv)]) == 0
    printed = capsys.readouterr().out
    assert "more than 0.3 of the inventory" in printed and "P(kept) [1]" in printed
    assert "N2" not in printed.split("\n", 2)[2]
    saved = pd.read_csv(csv)
    assert "depletion_time [s]" in saved.columns and set(saved["species"]) == {"He"}
    png = tmp_path / "chart.png"
    assert main(["chart", str(out), "-o", str(png)]) == 0
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and png.stat().st_size > 20000
    assert main(["columns"]) == 0
    assert "planet_mass" in capsys.readouterr().out
    # A different sweep into the same file is refused rather than mixed in.
    assert main(["sweep", str(table), "-o", str(out), "--samples", "5", "--quiet"]) == 2
    assert "made with other options" in capsys.readouterr().err


SIGNAL_CHILD = Path(__file__).with_name("sweep_signal_child.py")


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM, signal.SIGKILL])
def test_interrupted_sweep_resumes_to_the_same_file(tmp_path, sig):
    # The child sweeps with progress after every chunk of 4 cases and sends itself the signal
    # from the update that reports 12 cases: always mid-sweep, after exactly three chunks.
    total, kept = 24, 12
    table = sweep_table(tmp_path, total)
    out, reference = tmp_path / "run.h5", tmp_path / "whole.h5"
    sweep = ["sweep", str(table), "--samples", "20", "--threads", "2", "--chunk", "4"]
    command = [sys.executable, "-m", "exosieve.cli", *sweep]
    child = subprocess.run(
        [sys.executable, str(SIGNAL_CHILD), str(int(sig)), str(kept), *sweep, "-o", str(out)],
        capture_output=True,
        text=True,
    )
    if sig == signal.SIGKILL:
        assert child.returncode == -signal.SIGKILL, child.stderr
    else:
        assert child.returncode == 130, child.stderr
        assert (
            f"interrupted: {kept} of {total} cases are safe in {out}; run the same command "
            "again to resume" in child.stderr
        )
    # Resume (the appender cuts any block a kill left half-written), with the progress bar,
    # then compare with an uninterrupted run: the same numbers in every variable.
    resumed = subprocess.run([*command, "-o", str(out)], capture_output=True, text=True)
    assert resumed.returncode == 0, resumed.stderr
    assert f"resumed after the {kept} cases already in {out}" in resumed.stdout
    assert f"{total}/{total}" in resumed.stderr  # the progress bar's last state
    subprocess.run([*command, "-o", str(reference), "--quiet"], check=True)
    a, b = open_comparison(out), open_comparison(reference)
    assert a.complete and b.complete
    for name in ["case", *a.variables]:
        x, y = np.asarray(a[name]), np.asarray(b[name])
        if x.dtype.kind in "OU":
            assert [str(v) for v in x.ravel()] == [str(v) for v in y.ravel()], name
        else:
            assert np.array_equal(x, y, equal_nan=x.dtype.kind == "f"), name
    assert a.config == b.config


# --- conventions of a command-line tool ---------------------------------------------------------


def test_version_and_python_dash_m():
    for command in ([sys.executable, "-m", "exosieve", "--version"], ["--version"]):
        if command == ["--version"]:
            with pytest.raises(SystemExit) as stop:
                main(command)
            assert stop.value.code == 0
            continue
        child = subprocess.run(command, capture_output=True, text=True)
        assert child.returncode == 0, child.stderr
        assert child.stdout == f"exosieve {exosieve.__version__}\n"
    # python -m exosieve is the same command as the console script
    child = subprocess.run([sys.executable, "-m", "exosieve", "columns"], capture_output=True)
    assert child.returncode == 0 and b"Template:" in child.stdout


@pytest.mark.parametrize(
    ("argv", "status"),
    [
        (["columns"], 128 + signal.SIGPIPE),  # as for a program that SIGPIPE ended
        (["summary", "no-such.h5"], 2),  # bad input: its error goes to stderr as without a pipe
        (["--version"], 0),  # argparse ignores the failed write of --version and --help
        (["summary", "--help"], 0),
    ],
)
def test_a_closed_pipe_ends_the_command_quietly(argv, status):
    # Like `exosieve columns | head -1` after head has gone: the reading end is closed before
    # the command writes anything, so every write fails (no timing involved).
    read_end, write_end = os.pipe()
    os.close(read_end)
    try:
        child = subprocess.run(
            [sys.executable, "-m", "exosieve", *argv], stdout=write_end, stderr=subprocess.PIPE
        )
    finally:
        os.close(write_end)
    assert child.returncode == status, child.stderr
    if status:
        assert b"Traceback" not in child.stderr and b"Exception ignored" not in child.stderr
    if argv == ["columns"] or status == 0:
        assert child.stderr == b""


def test_a_file_error_exits_with_status_1(tmp_path, capsys):
    not_hdf5 = tmp_path / "notes.h5"
    not_hdf5.write_text("not an HDF5 file\n")
    assert main(["summary", str(not_hdf5)]) == 1
    assert "exosieve: error: HDF5 could not open" in capsys.readouterr().err


def test_ages_take_their_unit_and_a_bare_number_is_refused(tmp_path, capsys):
    table = sweep_table(tmp_path, 2)
    out = tmp_path / "ages.h5"
    argv = ["sweep", str(table), "-o", str(out), "--threads", "1", "--quiet"]
    assert main([*argv, "--start", "20 Myr", "--end", "1.5Gyr"]) == 0
    result = open_comparison(out)
    # 1 Myr = 1e6 Julian years of 365.25 d (IAU), the package's constants.
    np.testing.assert_allclose(result["age_start"], 20e6 * 365.25 * 86400, rtol=1e-15)
    np.testing.assert_allclose(result["age_end"], 1.5e9 * 365.25 * 86400, rtol=1e-15)
    with pytest.raises(SystemExit) as stopped:
        main([*argv, "--end", "4.5"])
    assert stopped.value.code == 2
    assert "--end: expected an age with its unit (s, yr, Myr or Gyr), e.g. '10 Myr', got '4.5'" in (
        capsys.readouterr().err
    )
