"""Comparing planet cases: case tables, the batch engine, Monte Carlo, result files, Dask."""

from __future__ import annotations

import json
import os
import re
import signal

import numpy as np
import pytest

import exosieve
from exosieve import _core
from exosieve import constants as c
from exosieve.batch import Interrupted, compare, open_comparison
from exosieve.catalogue import case_table_from_frame, case_table_template_path, read_case_table
from exosieve.cli import main

pd = pytest.importorskip("pandas")

HEADER = (
    "case,planet_mass [M_earth],planet_mass_sigma [M_earth],planet_radius [R_earth],"
    "exobase_altitude [km],exobase_density [m-3],exobase_temperature [K],"
    "exobase_temperature_lnsigma [1],inventory [particles],max_steps [1],x_N2,x_He,x_H,"
    "exobase_composition"
)


def rows(n: int) -> list[str]:
    """Invented Earth-like cases whose He is kept, partly lost or lost depending on the row."""
    out = []
    for i in range(n):
        mass = 0.6 + 0.1 * (i % 6)
        temperature = 800 + 120 * (i % 7)
        out.append(
            f"P{i},{mass},{0.1 * mass},1.0,500,1e13,{temperature},0.15,1e37,,0.7,0.25,0.05,bulk"
        )
    return out


def write(tmp_path, lines, name="cases.csv"):
    path = tmp_path / name
    path.write_text("\n".join([HEADER, *lines]) + "\n")
    return path


def same(a, b) -> bool:
    """Bitwise equality of arrays (NaN equal to NaN; strings compared as text)."""
    a, b = np.asarray(a), np.asarray(b)
    if a.dtype.kind in "OU":
        return a.shape == b.shape and [str(x) for x in a.ravel()] == [str(x) for x in b.ravel()]
    return a.shape == b.shape and bool(np.all((a == b) | (np.isnan(a) & np.isnan(b))))


def same_results(r1, r2) -> None:
    assert len(r1) == len(r2)
    assert r1.variables.keys() == r2.variables.keys()
    for name in ["case", *r1.variables]:
        assert same(r1[name], r2[name]), name


GYR_45 = 4.5 * c.GYR


def test_good_bad_and_failing_rows(tmp_path):
    lines = rows(6)
    lines[1] = lines[1].replace("P1,0.7,", "P1,heavy,")  # not a number
    lines[3] = lines[3].replace("P3,0.9,", "P3,-0.9,")  # out of range
    lines[4] = lines[4].replace(",1e37,,", ",1e37,2,")  # two steps cannot cover 4.5 Gyr
    path = write(tmp_path, lines)
    # A malformed table is refused before any run, with every bad row and its column named.
    with pytest.raises(ValueError) as refused:
        compare(path, t_end=GYR_45, output=tmp_path / "no.h5", threads=2)
    message = str(refused.value)
    assert "line 3 column 'planet_mass': 'heavy' is not a number" in message
    assert not (tmp_path / "no.h5").exists()
    lines_ok = list(lines)
    lines_ok[1] = rows(2)[1]
    with pytest.raises(
        ValueError, match=r"1 invalid row\n  line 5 \(case 'P3'\), column 'planet_mass'"
    ):
        compare(write(tmp_path, lines_ok, "b.csv"), t_end=GYR_45, threads=2)

    # Reported instead: bad rows carry their errors, the failing row its numerical error, and
    # every other row the same results as a table without those rows.
    result = compare(path, t_end=GYR_45, samples=4, seed=3, threads=2, bad_rows="report")
    errors = result.errors.set_index("case")
    assert "line 3 column 'planet_mass': 'heavy' is not a number" in errors.loc["P1", "error"]
    assert "line 5 (case 'P3'), column 'planet_mass': must be > 0, got" in errors.loc["P3", "error"]
    assert "no progress: max_steps = 2" in errors.loc["P4", "error"]
    assert errors.loc["P4", "samples_failed"] == 4
    assert set(errors.index) == {"P1", "P3", "P4"}
    good = [0, 2, 5]
    clean = compare(
        write(tmp_path, [lines[i] for i in good], "good.csv"),
        t_end=GYR_45,
        samples=4,
        seed=3,
        threads=1,
    )
    # The rows keep their keys, so only the rows' own draws matter: compare nominal figures.
    for name in ("final_retained_fraction", "depletion_time", "retained_fraction"):
        assert same(result[name][good], clean[name]), name
    summary = result.summary
    assert set(summary[summary["species"] == ""]["case"]) == {"P1", "P3"}
    failed = summary[summary["case"] == "P4"]
    assert (
        list(failed["species"]) == ["N2", "He", "H"]
        and failed["final_retained_fraction"].isna().all()
    )


def test_mole_fractions_must_sum_to_one(tmp_path, capsys):
    # x_N2 + x_He + x_H = 0.65 + 0.25 + 0.05 = 0.95: a species left out. Refused before any run
    # or file, naming the row, the case and the sum; the tolerance is |sum - 1| <= 1e-3.
    lines = rows(3)
    lines[1] = lines[1].replace(",1e37,,0.7,", ",1e37,,0.65,")
    lines[2] = lines[2].replace(",1e37,,0.7,", ",1e37,,0.7005,")  # 1.0005: accepted
    path = write(tmp_path, lines)
    with pytest.raises(
        ValueError,
        match=r"1 invalid row\n  line 3 \(case 'P1'\), mole fractions 'x_<species>' sum to "
        r"0\.95, not 1 \(allowed: within 0\.001\)",
    ):
        compare(path, t_end=GYR_45, output=tmp_path / "no.h5", threads=1)
    assert not (tmp_path / "no.h5").exists()
    # The command line refuses it the same way.
    assert main(["sweep", str(path), "-o", str(tmp_path / "cli.h5"), "--threads", "1"]) == 2
    assert "(case 'P1'), mole fractions 'x_<species>' sum to 0.95" in capsys.readouterr().err
    assert not (tmp_path / "cli.h5").exists()
    # Reported instead, the other rows run.
    result = compare(path, t_end=GYR_45, threads=1, bad_rows="report")
    errors = result.errors.set_index("case")
    assert set(errors.index) == {"P1"}
    assert "sum to 0.95" in errors.loc["P1", "error"]
    assert np.isfinite(result["final_retained_fraction"][[0, 2]]).all()


def test_frames_and_csv_give_the_same_table(tmp_path):
    path = write(tmp_path, rows(4))
    frame = pd.read_csv(path)
    a, b = read_case_table(path), case_table_from_frame(frame)
    assert a.fingerprint() == b.fingerprint()
    assert case_table_from_frame(frame.set_index("case")).fingerprint() == a.fingerprint()
    frame["planet_mass [M_earth]"] = frame["planet_mass [M_earth]"].astype(object)
    frame.loc[2, "planet_mass [M_earth]"] = "light"
    with pytest.raises(ValueError, match=r"row 2 column 'planet_mass': 'light' is not a number"):
        compare(frame)
    with pytest.raises(ValueError, match=r"unit 'K' does not measure planet_mass"):
        case_table_from_frame(pd.DataFrame({"case": ["a"], "planet_mass [K]": [1.0]}))
    odd = pd.read_csv(path).rename(columns={"exobase_density [m-3]": "exobase_densty [m-3]"})
    with pytest.raises(
        ValueError, match=r"unknown column 'exobase_densty' \(closest: exobase_density"
    ):
        compare(odd)


def test_same_seed_same_results_for_any_thread_count(tmp_path):
    path = write(tmp_path, rows(10))
    one = compare(path, t_end=GYR_45, samples=6, seed=11, threads=1, chunk_size=3)
    # Kept in memory (chunks as arrays) and streamed to a file (rows written from C++): the
    # same variables and values either way.
    out = tmp_path / "two.h5"
    two = compare(path, t_end=GYR_45, samples=6, seed=11, threads=2, chunk_size=4, output=out)
    assert two.path is not None
    same_results(one, two)
    other = compare(path, t_end=GYR_45, samples=6, seed=12, threads=2)
    assert not same(one["sample_retained_fraction"], other["sample_retained_fraction"])
    assert same(one["final_retained_fraction"], other["final_retained_fraction"])


def test_summary_matches_single_evolve_runs():
    # Two cases at a constant exobase temperature, two on the XUV law of their star.
    nan = np.nan
    frame = pd.DataFrame(
        {
            "case": ["A", "B", "C", "D"],
            "planet_mass [M_earth]": [0.8, 1.0, 1.2, 0.7],
            "planet_mass_sigma [M_earth]": [0.1, 0.1, 0.2, 0.1],
            "planet_radius [R_earth]": [0.95, 1.0, 1.1, 0.9],
            "semi_major_axis [au]": [0.3, 0.3, 0.5, 1.0],
            "star_mass [M_sun]": [0.8] * 4,
            "star_luminosity [L_sun]": [0.5] * 4,
            "exobase_altitude [km]": [500.0] * 4,
            "exobase_composition": ["bulk"] * 4,
            "exobase_density [m-3]": [1e13] * 4,
            "exobase_temperature [K]": [900.0, 1300.0, nan, nan],
            "exobase_temperature_lnsigma [1]": [0.15, 0.15, nan, nan],
            "temperature_reference [K]": [nan, nan, 1000.0, 1000.0],
            "temperature_reference_flux [W m-2]": [nan, nan, 4.6e-3, 4.6e-3],
            "temperature_exponent [1]": [nan, nan, 0.5, 0.7],
            "temperature_min [K]": [nan, nan, 300.0, 300.0],
            "temperature_max [K]": [nan, nan, 3000.0, 3000.0],
            "inventory [particles]": [1e37] * 4,
            "x_N2": [0.7] * 4,
            "x_He": [0.25] * 4,
            "x_H": [0.05] * 4,
        }
    )
    result = compare(frame, t_end=GYR_45, samples=8, seed=5, threads=2, retain=0.4)
    summary = result.summary.set_index(["case", "species"])
    x = {"N2": 0.7, "He": 0.25, "H": 0.05}
    core_table = case_table_from_frame(frame).to_core()

    def single(row, drawn):
        """The same case through the public single-run API (exosieve.evolve)."""
        star = exosieve.Star(drawn["star_mass"], drawn["star_luminosity"])
        planet = exosieve.Planet(
            drawn["planet_mass"], drawn["planet_radius"], drawn["semi_major_axis"], star
        )
        if "exobase_temperature" in drawn:
            temperature = drawn["exobase_temperature"]
        else:
            temperature = exosieve.XuvTemperature(
                drawn["temperature_reference"],
                drawn["temperature_reference_flux"],
                drawn["temperature_exponent"],
                drawn["temperature_min"],
                drawn["temperature_max"],
            )
        exobase = exosieve.PrescribedExobase(
            drawn["planet_radius"] + drawn["exobase_altitude"],
            temperature,
            {k: v * drawn["exobase_density"] for k, v in x.items()},
        )
        inventory = {k: v * drawn["inventory"] / sum(x.values()) for k, v in x.items()}
        t_span = (10 * c.MYR, GYR_45)
        return exosieve.evolve(planet, exobase, inventory, t_span, t_eval=t_span, rtol=1e-6)

    thresholds = _core.RegimeThresholds()
    for row, case in enumerate("ABCD"):
        r = single(row, _core.case_values(core_table, row))
        for name in x:
            line = summary.loc[(case, name)]
            n = r.inventory[name]
            lam = r.jeans_parameter[name]
            assert line["final_retained_fraction"] == pytest.approx(n[-1] / n[0], rel=1e-9)
            assert line["retained"] == (n[-1] / n[0] > 0.4)
            depleted = r.depletion_time[name]
            assert same(line["depletion_time"], np.nan if depleted is None else depleted)
            assert line["efolding_time"] == pytest.approx(n[0] / r.escape_rate[name][0])
            assert line["jeans_parameter_start"] == pytest.approx(lam[0], rel=1e-12)
            assert line["jeans_parameter_end"] == pytest.approx(lam[-1], rel=1e-12)
            code = _core.classify_regime(np.array([lam[0]]), thresholds)[0]
            assert line["regime_start"] == _core.regime_name(int(code))
        if case in "CD":  # the XUV law cools the exobase: lambda rises over the run
            assert (
                summary.loc[(case, "H"), "jeans_parameter_end"]
                > summary.loc[(case, "H"), "jeans_parameter_start"]
            )
        # Monte Carlo: each sample is the single run of its drawn parameters; the probability
        # and the percentiles are those of the sampled fractions (numpy as the reference).
        for k in (0, 7):
            drawn = _core.case_values(core_table, row, 5, k)
            assert drawn["planet_radius"] == result["planet_radius"][row]  # no uncertainty
            rs = single(row, drawn)
            for j, name in enumerate(x):
                got = result["sample_retained_fraction"][row, k, j]
                n = rs.inventory[name]
                assert got == pytest.approx(n[-1] / n[0], rel=1e-9, abs=1e-300)
        draws = result["sample_retained_fraction"][row, :, 1]
        line = summary.loc[(case, "He")]
        assert line["probability_retained"] == np.mean(draws > 0.4)
        assert line["retained_fraction_p50"] == pytest.approx(np.percentile(draws, 50))
        assert line["samples_ok"] == 8


def test_result_file_layout(tmp_path):
    xr = pytest.importorskip("xarray")
    path = write(tmp_path, rows(3))
    result = compare(path, t_end=GYR_45, samples=5, threads=1, times=6)
    out = result.to_hdf5(tmp_path / "r.h5")
    with xr.open_dataset(out, engine="h5netcdf") as ds:
        # `input`: the uncertain inputs, whose drawn values each sample stores.
        sizes = {"case": 3, "species": 3, "time": 6, "sample": 5, "input": 2}
        assert dict(ds.sizes) == sizes
        assert ds.retained_fraction.dims == ("case", "time", "species")
        assert ds.sample_retained_fraction.dims == ("case", "sample", "species")
        assert ds.sample_input.dims == ("case", "sample", "input")
        for name in list(ds.data_vars) + ["time", "species", "sample", "case", "input"]:
            assert ds[name].attrs["units"] and ds[name].attrs["long_name"], name
        assert ds.time.attrs["units"] == "s"
        config = json.loads(ds.attrs["config"])
        assert config["options"]["samples"] == 5 and config["table"]["rows"] == 3
        he = ds.final_retained_fraction.sel(species="He").values
        assert same(he, result["final_retained_fraction"][:, 1])
    again = open_comparison(out)
    assert again.complete and again.species == ["N2", "He", "H"]
    pd.testing.assert_frame_equal(again.summary, result.summary)


def test_template_and_demo_catalogue_run(tmp_path):
    template = compare(case_table_template_path(), samples=3, threads=1)
    assert template.complete and len(template.errors) == 0
    assert set(template.summary["case"]) == {
        "Orvane b",
        "Orvane c",
        "Quell b",
        "Orvane d",
        "Quell c",
        "Quell d",
    }
    demo = compare(exosieve.catalogue.demo_catalogue_path(), threads=1)
    assert len(demo) == 8 and len(demo.errors) == 0


def test_ctrl_c_keeps_the_finished_cases(tmp_path, ctrl_c):
    # Progress after every chunk of 4 cases: the update that reports the second chunk sends
    # SIGINT, as Ctrl-C does, and the run keeps exactly those two chunks, on any machine.
    total = 24
    path = write(tmp_path, rows(total))
    out = tmp_path / "partial.h5"
    seen = []

    def progress(done, total):
        seen.append(done)
        if done == 8:
            os.kill(os.getpid(), signal.SIGINT)

    with pytest.raises(Interrupted) as stopped:
        compare(
            path,
            t_end=GYR_45,
            samples=20,
            threads=2,
            chunk_size=4,
            output=out,
            progress=progress,
            progress_every=1,
        )
    assert seen == [4, 8]
    partial = stopped.value.result
    assert len(partial) == 8 and partial.total_cases == total
    assert len(open_comparison(out)) == 8
    # Rerunning resumes after the finished chunks and ends with the uninterrupted results.
    resumed = compare(path, t_end=GYR_45, samples=20, threads=2, chunk_size=4, output=out)
    assert resumed.resumed_from == 8 and resumed.complete
    whole = compare(path, t_end=GYR_45, samples=20, threads=2, chunk_size=6)
    same_results(resumed, whole)


def test_progress_by_count_steps_through_the_chunks(tmp_path):
    path = write(tmp_path, rows(10))  # chunks of 2 cases
    for every, expected in [(1, [2, 4, 6, 8, 10]), (2, [4, 8, 10]), (3, [6, 10]), (5, [10])]:
        for threads in (1, 2):
            seen = []
            compare(
                path,
                t_end=GYR_45,
                samples=3,
                threads=threads,
                chunk_size=2,
                progress=lambda d, t, seen=seen: seen.append((d, t)),
                progress_every=every,
            )
            assert seen == [(d, 10) for d in expected], (every, threads)
    for bad in (0, -2, 1.0, True):
        with pytest.raises(ValueError, match=r"progress_every must be a whole number >= 1"):
            compare(path, t_end=GYR_45, progress_every=bad)


def test_dask_cluster_gives_the_local_results(tmp_path):
    pytest.importorskip("distributed")
    from distributed import Client, LocalCluster

    path = write(tmp_path, rows(9))
    local = compare(path, t_end=GYR_45, samples=6, seed=7, threads=2)
    with (
        LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0"
        ) as cluster,
        Client(cluster) as client,
    ):
        remote = compare(
            path,
            t_end=GYR_45,
            samples=6,
            seed=7,
            client=client,
            chunk_size=2,
            output=tmp_path / "remote.h5",
        )
        # The command line, given the scheduler's address.
        out = tmp_path / "cli.h5"
        argv = ["sweep", str(path), "-o", str(out), "--samples", "6", "--seed", "7", "--quiet"]
        assert main([*argv, "--scheduler", cluster.scheduler_address, "--chunk", "3"]) == 0
    assert remote.path is not None
    same_results(local, remote)
    same_results(local, open_comparison(out))


def test_progress_reports_cases_rate_and_time_left(tmp_path, capsys):
    path = write(tmp_path, rows(6))
    # By time (the default): whatever the machine's speed, the counts rise to 6 of 6.
    seen = []
    compare(path, t_end=GYR_45, threads=1, chunk_size=2, progress=lambda d, t: seen.append((d, t)))
    assert seen[-1] == (6, 6) and all(t == 6 for _, t in seen)
    assert [d for d, _ in seen] == sorted(d for d, _ in seen)
    # progress=True: a tqdm bar on stderr, in cases, with the rate and the time left
    # ("elapsed<left"); its last state, written when it closes, is 6 of 6.
    compare(path, t_end=GYR_45, threads=2, chunk_size=2, progress=True, progress_every=1)
    last = capsys.readouterr().err.split("\r")[-1]
    assert "6/6" in last and "case/s" in last and re.search(r"\[\d\d:\d\d<\d\d:\d\d", last)
