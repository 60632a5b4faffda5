"""The ``exosieve invert`` command on a case table, checked against the Rayleigh closed form."""

from __future__ import annotations

import csv
import math

import pytest
from test_inversion import MASS, N_H, R0, RADIUS, SPAN, T_EXO, exact_total

from exosieve import constants as c
from exosieve.cli import main

X_H, X_D = 1 / (1 + R0), R0 / (1 + R0)
HEADER = (
    "case,planet_mass [kg],planet_radius [m],exobase_altitude [km],exobase_density [m-3],"
    "exobase_temperature [K],inventory [particles],age_start [Gyr],age_end [Gyr],x_H,x_D,"
    "exobase_composition"
)
ROW = f"{MASS!r},{RADIUS!r},400,{N_H / X_H!r},{T_EXO},1e42,0,{SPAN / c.GYR!r},{X_H!r},{X_D!r},bulk"


def table(tmp_path, names=("Invented a", "Invented b")):
    # Invented planets: the Rayleigh model of test_inversion.py.
    path = tmp_path / "cases.csv"
    path.write_text("\n".join([HEADER, *(f"{n},{ROW}" for n in names)]) + "\n")
    return path


def test_invert_prints_and_writes_the_solution_and_percentiles(tmp_path, capsys):
    out = tmp_path / "inverted.csv"
    args = ["invert", str(table(tmp_path)), "--ratio", "D/H", "--measured", "3", "--relative"]
    args += ["--sigma", "0.3", "--samples", "20", "--ocean", "--csv", str(out), "--rtol", "1e-10"]
    assert main(args) == 0
    printed = capsys.readouterr().out
    assert "Invented a (row 0)" in printed and "Invented b (row 1)" in printed
    assert "20 samples: 20 solved" in printed and "ocean initial [m]" in printed
    with out.open() as handle:
        rows = list(csv.DictReader(handle))
    assert [r["case"] for r in rows] == ["Invented a", "Invented b"]
    exact = exact_total(3.0)
    for r in rows:
        assert r["status"] == "solved"
        assert float(r["total_initial [particles]"]) == pytest.approx(exact, rel=1e-6)
        assert float(r["initial_ratio [1]"]) == pytest.approx(R0, rel=1e-12)
        # Two rows, the same model, their own draws (the key is the row).
        assert float(r["samples_solved [1]"]) == 20
        p16, p84 = (float(r[f"total_initial_p{q} [particles]"]) for q in (16, 84))
        assert p16 < exact < p84
        # H and D: one hydrogen atom each, S m_H2O / 2 of water over 4 pi R^2 at 1000 kg/m^3.
        water = exact / 2 * 18.015 * c.AMU
        depth = water / (1000.0 * 4 * math.pi * RADIUS**2)
        assert float(r["ocean_initial [m]"]) == pytest.approx(depth, rel=1e-6)
    assert rows[0]["total_initial_p50 [particles]"] != rows[1]["total_initial_p50 [particles]"]


def test_invert_without_a_solution_says_so_with_exit_status_3(tmp_path, capsys):
    path = table(tmp_path)
    assert main(["invert", str(path), "--ratio", "D/H", "--measured", "1e-5", "--case", "1"]) == 3
    printed = capsys.readouterr().out
    assert "Invented b (row 1)" in printed and "Invented a" not in printed
    assert "no solution: the ratio D/H at t_end is" in printed
    assert "at the high end for total initial inventories of H, D" in printed


def test_invert_refuses_bad_input_naming_it(tmp_path, capsys):
    path = table(tmp_path)
    assert main(["invert", str(path), "--ratio", "He/H", "--measured", "1", "--case", "0"]) == 2
    assert "ratio numerator 'He' is not a species" in capsys.readouterr().err
    assert main(["invert", str(path), "--ratio", "D/H", "--measured", "1", "--case", "Nope"]) == 2
    assert "no row is called 'Nope'" in capsys.readouterr().err
    with pytest.raises(SystemExit):
        main(["invert", str(path), "--ratio", "D/H", "--measured", "1", "--sigma", "1",
              "--lnsigma", "1"])  # fmt: skip
    with pytest.raises(SystemExit):
        main(["invert", "--help"])
    text = " ".join(capsys.readouterr().out.split())  # help text as one line
    for word in ("[particles]", "(s, yr, Myr, Gyr)", "[kg m^-3]", "--samples", "no solution"):
        assert word in text, word
