"""Reading case tables: CSV as RFC 4180 describes it, encodings, long texts, memory."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest

import exosieve
from exosieve import constants as c
from exosieve.batch import compare
from exosieve.catalogue import (
    MAX_TEXT_LENGTH,
    LineLabels,
    case_table_from_frame,
    read_case_table,
)

pd = pytest.importorskip("pandas")

HEADER = (
    "case,planet_mass [M_earth],planet_radius [R_earth],exobase_altitude [km],"
    "exobase_density [m-3],exobase_temperature [K],inventory [particles],x_N2,x_He,"
    "exobase_composition"
)
# Invented Earth-like planets (demo values).
ROW = "{name},1.0,1.0,500,1e13,{temperature},1e37,0.9,0.1,bulk"


def write(tmp_path: Path, text: str, name: str = "cases.csv", encoding: str = "utf-8") -> Path:
    path = tmp_path / name
    path.write_bytes(text.encode(encoding))
    return path


def test_quoted_hash_is_a_case_and_comments_start_a_line(tmp_path):
    path = write(
        tmp_path,
        "# invented planets\n"
        f"{HEADER}\n"
        "# a comment between rows\n"
        f"{ROW.format(name='A', temperature=900)}\n"
        + ROW.format(name='"#B"', temperature=1000)
        + "\n"
        + ROW.format(name='"C, #3"', temperature=1100)
        + "\n",
    )
    table = read_case_table(path)
    assert table.names == ["A", "#B", "C, #3"]
    assert list(table.column("exobase_temperature")) == [900.0, 1000.0, 1100.0]
    assert table.row_labels[:] == ["line 4", "line 5", "line 6"]


def test_quoted_line_break_stays_in_its_field(tmp_path):
    # RFC 4180 section 2.6: fields with line breaks are enclosed in double quotes. A line of
    # the field that starts with '#' is data, not a comment.
    path = write(
        tmp_path,
        f"{HEADER},comment\n"
        f'"B\nsplit",1.0,1.0,500,1e13,900,1e37,0.9,0.1,bulk,"first\n# second"\n'
        f"{ROW.format(name='C', temperature=1000)},\n",
    )
    table = read_case_table(path, errors="collect")
    assert table.names == ["B\nsplit", "C"]
    assert table.text_columns["comment"] == ["first\n# second", ""]
    assert table.row_errors == ["", ""]
    assert table.row_labels[:] == ["line 2", "line 5"]  # where each record starts


def test_quoted_line_break_runs_no_phantom_case(tmp_path):
    path = write(
        tmp_path,
        f'{HEADER}\n"B\nsplit",1.0,1.0,500,1e13,900,1e37,0.9,0.1,bulk\n"#C",1.0,1.0,500,1e13,1000,1e37,0.9,0.1,bulk\n',
    )
    result = compare(path, times=[c.GYR], bad_rows="report")
    assert result.cases == ["B\nsplit", "#C"]
    assert result.complete and result.total_cases == 2
    assert len(result.errors) == 0


def test_byte_order_mark_is_accepted(tmp_path):
    path = write(tmp_path, f"{HEADER}\n{ROW.format(name='A', temperature=900)}\n", "bom.csv")
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes())
    table = read_case_table(path)
    assert table.names == ["A"]
    assert table.column("exobase_temperature")[0] == 900.0
    # A DataFrame read without stripping it keeps the mark in its first column name.
    frame = pd.DataFrame({"\ufeffcase": ["A"], "planet_mass [M_earth]": [1.0], "x_N2": [1.0]})
    assert case_table_from_frame(frame).names == ["A"]


def test_invisible_characters_in_a_header_are_shown(tmp_path):
    path = write(tmp_path, "case,planet\u200b_mass [M_earth],x_N2\nA,1.0,1.0\n")
    with pytest.raises(ValueError, match=r"cannot read header 'planet\\u200b_mass"):
        read_case_table(path)


def test_encoding_error_names_the_file_and_line(tmp_path):
    text = f"{HEADER},comment\n{ROW.format(name='A', temperature=900)},ok\n"
    text += f"{ROW.format(name='B', temperature=900)},T in \u00b0C\n"
    path = write(tmp_path, text, "latin.csv", encoding="latin-1")
    with pytest.raises(ValueError, match=r"latin\.csv line 3: not UTF-8 text \(byte 0xb0"):
        read_case_table(path)


@pytest.mark.parametrize("length", [MAX_TEXT_LENGTH + 1, 200_000])
def test_very_long_case_name_is_refused_naming_the_row(tmp_path, length):
    name = "P" * length
    path = write(
        tmp_path,
        f"{HEADER}\n{ROW.format(name='A', temperature=900)}\n"
        + ROW.format(name=name, temperature=900)
        + "\n",
    )
    with pytest.raises(ValueError, match=r"cases\.csv line 3"):
        read_case_table(path)
    frame = pd.DataFrame({"case": ["A", name], "planet_mass [M_earth]": [1.0, 1.0], "x_N2": 1.0})
    with pytest.raises(ValueError, match=r"row 1 column 'case': text of \d+ characters"):
        case_table_from_frame(frame)
    # Reported, not raised, when collecting: the row is kept and its error names it.
    table = case_table_from_frame(frame, errors="collect")
    assert len(table) == 2 and table.row_errors[0] == ""
    assert "row 1 column 'case'" in table.row_errors[1]


def test_line_labels_read_as_a_list():
    labels = LineLabels(np.array([2, 5]))
    assert len(labels) == 2 and labels[-1] == "line 5" and list(labels) == ["line 2", "line 5"]
    assert labels == ["line 2", "line 5"] and labels != ["line 2"]


def test_reading_a_table_takes_memory_for_its_values_only(tmp_path):
    # Peak resident memory of a fresh interpreter reading 1e5 rows of a 12-column table,
    # above what it held before reading. A row holds 9 numbers (72 B), a name (~60 B) and
    # its line number; the loader once took ~2.3 KiB a row.
    rows = 100_000
    path = tmp_path / "big.csv"
    with path.open("w") as handle:
        handle.write(f"{HEADER},star,comment,star_age [Gyr]\n")
        for i in range(rows):
            row = ROW.format(name=f"Planet {i}", temperature=800 + i % 500)
            handle.write(f"{row},Orvane,invented,4.5\n")
    script = textwrap.dedent(
        f"""
        import resource
        from exosieve.catalogue import read_case_table
        before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        table = read_case_table({str(path)!r})
        after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        assert len(table) == {rows}
        print((after - before) * 1024 / {rows})
        """
    )
    env = dict(os.environ, PYTHONPATH=str(Path(exosieve.__file__).parents[1]))
    out = subprocess.run(
        [sys.executable, "-c", script],
        capture_output=True,
        text=True,
        check=True,
        env=env,
    )
    bytes_per_row = float(out.stdout)
    assert bytes_per_row < 600, f"{bytes_per_row:.0f} B per row"


@pytest.mark.parametrize(
    ("column", "value", "shown"),
    [
        (
            "planet_mass [M_earth]",
            -1.0,
            r"column 'planet_mass': must be > 0, got -1 M_earth \(-5.97",
        ),
        (
            "exobase_altitude [km]",
            -5.0,
            r"column 'exobase_altitude': must be >= 0, got -5 km \(-5000 m\)",
        ),
        (
            "exobase_density [cm-3]",
            -2.0,
            r"column 'exobase_density': must be > 0, got -2 cm-3 \(-2000000 m-3\)",
        ),
        (
            "exobase_temperature [K]",
            -3.0,
            r"column 'exobase_temperature': must be > 0, got -3 K(?! \()",
        ),
    ],
)
def test_bad_value_is_shown_in_the_unit_the_table_gave(tmp_path, column, value, shown):
    frame = pd.DataFrame(
        {
            "case": ["A"],
            "planet_mass [M_earth]": [1.0],
            "planet_radius [R_earth]": [1.0],
            "exobase_altitude [km]": [500.0],
            "exobase_composition": ["bulk"],
            "exobase_density [cm-3]": [1e7],
            "exobase_temperature [K]": [900.0],
            "inventory [particles]": [1e37],
            "x_N2": [1.0],
        }
    )
    frame[column] = value
    with pytest.raises(ValueError, match=shown):
        compare(frame, times=[c.GYR])
    # The same from a file.
    path = tmp_path / "bad.csv"
    frame.to_csv(path, index=False)
    with pytest.raises(ValueError, match=r"line 2 \(case 'A'\), " + shown):
        compare(path, times=[c.GYR])


def test_quote_left_open_is_refused_not_swallowing_rows(tmp_path):
    # Without the check the rest of the file became the text of the last field of line 3.
    row_a = ROW.format(name="A", temperature=900)
    path = write(tmp_path, f'{HEADER},comment\n{row_a},ok\n{row_a},"open\n{row_a},lost\n')
    with pytest.raises(ValueError, match=r"cases\.csv line 3: cannot read the CSV record"):
        read_case_table(path, errors="collect")
    path = write(tmp_path, f'{HEADER}\n"A"x,1.0,1.0,500,1e13,900,1e37,0.9,0.1,bulk\n')
    with pytest.raises(ValueError, match=r"cases\.csv line 2: cannot read the CSV record"):
        read_case_table(path)


def test_control_characters_in_texts_are_refused(tmp_path):
    row = ROW.format(name="A\x00B", temperature=900)
    path = write(tmp_path, f"{HEADER}\n{row}\n")
    with pytest.raises(ValueError, match=r"line 2 column 'case': text holds the control char"):
        read_case_table(path)
