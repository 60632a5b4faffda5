"""Result files of sweeps: what may be replaced, damaged bytes, and reading a running sweep."""

from __future__ import annotations

import fcntl
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import h5py
import numpy as np
import pytest

import exosieve
from exosieve.batch import compare, open_comparison
from exosieve.cli import main
from exosieve.hdf5_io import (
    FileError,
    ResultAppender,
    ResultWriter,
    file_is_locked,
    read_doubles,
    read_strings,
)

HEADER = (
    "case,planet_mass [M_earth],planet_radius [R_earth],exobase_altitude [km],"
    "exobase_density [m-3],exobase_temperature [K],inventory [particles],x_N2,x_He,x_H,"
    "exobase_composition"
)


def table(tmp_path: Path, n: int = 6) -> Path:
    """Invented Earth-like cases."""
    lines = [
        f"P{i},{0.6 + 0.1 * i},1.0,500,1e13,{800 + 100 * i},1e37,0.7,0.25,0.05,bulk"
        for i in range(n)
    ]
    path = tmp_path / "cases.csv"
    path.write_text("\n".join([HEADER, *lines]) + "\n")
    return path


def sweep(tmp_path: Path, name: str = "run.h5", **options) -> Path:
    out = tmp_path / name
    compare(table(tmp_path), output=out, threads=1, samples=3, **options)
    return out


# --- what may be replaced -------------------------------------------------------------------


def test_the_case_table_is_never_replaced_by_its_results(tmp_path, capsys):
    cases = table(tmp_path)
    before = cases.read_bytes()
    assert main(["sweep", str(cases), "-o", str(cases), "--overwrite", "--quiet"]) == 2
    assert "is the case table itself" in capsys.readouterr().err
    assert cases.read_bytes() == before


def test_a_file_that_is_not_an_exosieve_result_is_left_alone_whatever_the_flag(tmp_path, capsys):
    cases = table(tmp_path)
    other = tmp_path / "notes.txt"
    other.write_text("my notes\n")
    for flag in ([], ["--overwrite"]):
        assert main(["sweep", str(cases), "-o", str(other), "--quiet", *flag]) == 2
        assert "is not a sweep file of exosieve; it was left alone" in capsys.readouterr().err
        assert other.read_text() == "my notes\n"
    # A foreign HDF5 file, and the writer of the core itself.
    foreign = tmp_path / "foreign.h5"
    with h5py.File(foreign, "w") as f:
        f["x"] = np.arange(3.0)
    with pytest.raises(ValueError, match="not an exosieve result file; it was left alone"):
        ResultWriter(foreign, {"k": 1})
    with pytest.raises(ValueError, match="not an exosieve result file"):
        ResultWriter(other, {"k": 1})
    with h5py.File(foreign, "r") as f:
        assert list(f) == ["x"]


def test_a_file_locked_by_a_running_sweep_is_reported_as_locked(tmp_path):
    out = sweep(tmp_path)
    rows = open_comparison(out).config["table"]["rows"]
    appender = ResultAppender(out)  # as a running sweep holds it
    try:
        assert file_is_locked(out)
        for overwrite in (False, True):
            with pytest.raises(FileError, match="is locked: another process has it open"):
                compare(table(tmp_path), output=out, threads=1, samples=3, overwrite=overwrite)
        with pytest.raises(FileError, match="is locked"):
            ResultWriter(out, {"k": 1})
    finally:
        appender.close()
    assert not file_is_locked(out)
    assert len(open_comparison(out)) == rows


def test_a_leftover_without_results_does_not_block_the_corrected_run(tmp_path):
    cases = table(tmp_path)
    out = tmp_path / "run.h5"
    out.write_bytes(b"")  # e.g. made by mktemp, or by a shell redirection
    assert len(compare(cases, output=out, threads=1)) == 6
    # A sweep file that stopped before its first chunk, with other options: replaced.
    out.unlink()
    ResultAppender(_schema(out, samples=7)).close()
    result = compare(cases, output=out, threads=1, samples=2)
    assert len(result) == 6 and result.samples == 2 and result.resumed_from == 0


def _schema(out: Path, samples: int) -> ResultWriter:
    writer = ResultWriter(out, {"kind": "exosieve.compare", "options": {"samples": samples}})
    writer.add_case_variable("steps", int, [], units="1", long_name="steps")
    return writer


def test_summary_options_changed_on_resume_are_refused(tmp_path):
    out = sweep(tmp_path)
    with pytest.raises(ValueError, match=r"summary options retain=0.5.*cannot change"):
        compare(table(tmp_path), output=out, threads=1, samples=3, retain=0.9)
    with pytest.raises(ValueError, match="cannot change"):
        compare(table(tmp_path), output=out, threads=1, samples=3, percentiles=(10.0,))
    again = compare(table(tmp_path), output=out, threads=1, samples=3)
    assert again.resumed_from == 6
    assert json.loads(h5py.File(out, "r").attrs["config"])["summary"]["retain"] == 0.5


# --- damaged files --------------------------------------------------------------------------


def chunk_offset(path: Path, name: str) -> tuple[int, int]:
    with h5py.File(path, "r") as f:
        info = f[name].id.get_chunk_info(0)
        return int(info.byte_offset), int(info.size)


def flipped(path: Path, offset: int, to: Path) -> Path:
    shutil.copy(path, to)
    with open(to, "r+b") as f:
        f.seek(offset)
        byte = f.read(1)
        f.seek(offset)
        f.write(bytes([byte[0] ^ 0xFF]))
    return to


def test_every_numeric_dataset_appendable_ones_too_carries_a_fletcher32_checksum(tmp_path):
    out = sweep(tmp_path)
    with h5py.File(out, "r") as f:
        for name in ("time", "sample"):
            assert f[name].fletcher32 and f[name].chunks, name
        numeric = [name for name, d in f.items() if d.dtype.kind in "fi" and d.ndim > 0]
        assert {"row", "steps", "retained_fraction", "sample_failed"} <= set(numeric)
        for name in numeric:
            assert f[name].fletcher32 and f[name].chunks, name


@pytest.mark.parametrize(
    ("name", "byte"), [("final_retained_fraction", 7), ("sample_failed", 1), ("time", 3)]
)
def test_a_flipped_byte_in_numbers_is_refused_naming_the_dataset(tmp_path, name, byte):
    # time: by its checksum; case variables: by their range (sign bit, a count of 65280).
    out = sweep(tmp_path)
    offset, _ = chunk_offset(out, name)
    bad = flipped(out, offset + byte, tmp_path / "bad.h5")
    with pytest.raises(FileError, match=f"'{name}'"):
        assert open_comparison(bad)[name] is None
    # Resuming refuses the file too, rather than appending to altered values.
    with pytest.raises(FileError, match=f"'{name}'"):
        compare(table(tmp_path), output=bad, threads=1, samples=3)


@pytest.mark.parametrize(
    "name", ["row", "steps", "planet_mass", "retained_fraction", "sample_failed", "regime_start"]
)
def test_a_flipped_byte_in_an_appended_chunk_is_refused_by_every_reader(tmp_path, capsys, name):
    # A low-order byte of the first row: a value still in range, so only the checksum can tell.
    out = sweep(tmp_path)
    offset, _ = chunk_offset(out, name)
    bad = flipped(out, offset + 1, tmp_path / "bad.h5")
    message = f"dataset '{name}' fails its Fletcher32 checksum"
    with pytest.raises(FileError, match=message):
        assert open_comparison(bad)[name] is None
    assert main(["summary", str(bad)]) != 0
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err
    with pytest.raises(FileError, match=message):  # resuming appends to no altered value
        compare(table(tmp_path), output=bad, threads=1, samples=3)
    with h5py.File(bad, "r") as f, pytest.raises(OSError):
        assert f[name][...] is None  # h5py refuses the chunk too


def _schema_with_full_chunks(out: Path) -> ResultAppender:
    # Rows of 32 KiB: two rows a chunk, so five rows fill chunks 0 and 1.
    writer = ResultWriter(out, {"kind": "test"})
    writer.add_coordinate("level", np.arange(4096.0), units="1", long_name="level")
    writer.add_case_variable("x", float, ["level"], units="1", long_name="x")
    appender = ResultAppender(writer)
    appender.append({"x": np.arange(5 * 4096.0).reshape(5, 4096)})
    return appender


def test_a_checksum_failure_while_another_process_writes_the_file_says_read_again(tmp_path):
    out = tmp_path / "x.h5"
    _schema_with_full_chunks(out).close()
    offset, _ = chunk_offset(out, "x")  # chunk 0: full, not rewritten by later appends
    bad = flipped(out, offset + 9, tmp_path / "bad.h5")
    with pytest.raises(FileError, match="is damaged: dataset 'x' fails its Fletcher32 checksum"):
        read_doubles(bad, "x")
    # Another process appending (here: holding the lock as HDF5's writers do): the damaged
    # chunk may be a block being written, so the reader says to read again.
    with open(bad, "rb") as holder:
        fcntl.flock(holder, fcntl.LOCK_EX)
        with pytest.raises(
            FileError, match="while another process is writing the file.*read again"
        ):
            read_doubles(bad, "x")
    # This process's own appender holds the file: no other writer, so it is damage.
    appender = ResultAppender(bad)
    try:
        with pytest.raises(FileError, match="is damaged: dataset 'x'"):
            read_doubles(bad, "x")
    finally:
        appender.close()


def test_a_last_chunk_torn_by_a_kill_is_repaired_when_the_sweep_resumes(tmp_path):
    # A kill while an append rewrites the last, partly filled chunks (which hold committed rows
    # too) leaves the new bytes written and the old checksums: built here from the file after
    # its first chunk of 4 cases and the finished file, whose chunk 0 was rewritten in place.
    cases = table(tmp_path)
    out = tmp_path / "run.h5"
    first = tmp_path / "first.h5"

    def progress(done: int, total: int) -> None:
        if done == 4:
            shutil.copy(out, first)

    full = compare(
        cases, output=out, threads=1, samples=3, chunk_size=4, progress=progress, progress_every=1
    )
    with h5py.File(first, "r") as f:
        assert int(f.attrs["completed"]) == 4
        names = [name for name, d in f.items() if d.dtype.kind in "fi" and d.ndim > 0]
    old, new = bytearray(first.read_bytes()), out.read_bytes()
    torn = 0
    for name in names:
        offset, size = chunk_offset(first, name)
        if name in ("time", "sample"):
            continue
        assert chunk_offset(out, name) == (offset, size), name
        old[offset : offset + size - 4] = new[offset : offset + size - 4]
        torn += 1
    damaged = tmp_path / "torn.h5"
    damaged.write_bytes(bytes(old))
    with pytest.raises(FileError, match="fails its Fletcher32 checksum"):
        assert open_comparison(damaged)["steps"] is None
    resumed = compare(cases, output=damaged, threads=1, samples=3, chunk_size=4)
    assert torn > 20 and resumed.resumed_from == 4 and len(resumed) == 6
    for name in ("steps", "retained_fraction", "sample_retained_fraction", "case"):
        np.testing.assert_array_equal(resumed[name], full[name])


def test_values_outside_their_range_are_refused_on_open_and_on_resume(tmp_path):
    out = sweep(tmp_path)
    with h5py.File(out, "r+") as f:  # rewritten with a valid checksum: only the range can tell
        f["sample_failed"][2, 1] = 65280
    with pytest.raises(FileError, match=r"dataset 'sample_failed' holds 65280 at \(2, 1\)"):
        assert open_comparison(out).errors is None
    with pytest.raises(FileError, match="'sample_failed'"):
        compare(table(tmp_path), output=out, threads=1, samples=3)


READ_ALL = """
import sys
from exosieve.batch import open_comparison
from exosieve.hdf5_io import FileError
for path in sys.argv[1:]:
    try:
        r = open_comparison(path)
        print(path, "read", r.cases, list(r["error"]), r.species, flush=True)
    except (FileError, ValueError) as err:
        print(path, "refused", err, flush=True)
"""


def test_damaged_string_heaps_give_errors_never_a_crash(tmp_path):
    out = sweep(tmp_path)
    data = out.read_bytes()
    heap = data.find(b"GCOL")
    assert heap > 0
    # Every byte of the collection header and of its first objects' headers and text.
    copies = [flipped(out, heap + k, tmp_path / f"bad{k}.h5") for k in range(0, 96)]
    env = {**os.environ, "PYTHONPATH": str(Path(exosieve.__file__).parent.parent)}
    child = subprocess.run(
        [sys.executable, "-c", READ_ALL, *map(str, copies)],
        capture_output=True,
        text=True,
        env=env,
        timeout=300,
    )
    assert child.returncode == 0, child.stderr[-2000:]
    lines = child.stdout.splitlines()
    assert len(lines) == len(copies)
    refused = [line for line in lines if " refused " in line]
    assert refused and all("damaged" in line or "HDF5" in line for line in refused)
    assert list(read_strings(out, "species")) == ["N2", "He", "H"]


# --- reading a running sweep ----------------------------------------------------------------

READ_LIVE = """
import sys, h5py
from exosieve.batch import open_comparison
live = open_comparison(sys.argv[1])
with h5py.File(sys.argv[1], "r", locking=False) as f:
    done = int(f.attrs["completed"])
    assert list(f["steps"][:done]) == list(live["steps"])
    print(done, len(live))
"""


def test_a_running_sweep_can_be_read_by_open_comparison_h5py_and_xarray(tmp_path):
    xr = pytest.importorskip("xarray")
    cases = table(tmp_path, 40)
    out = tmp_path / "live.h5"
    seen: list[tuple[int, list[int], list[int]]] = []
    env = {**os.environ, "PYTHONPATH": str(Path(exosieve.__file__).parent.parent)}

    def progress(done: int, total: int) -> None:
        # Called by the sweep while its file is open for appending (the last call always is).
        if not out.exists():
            return
        live = open_comparison(out)
        rows = len(live)
        with h5py.File(out, "r", locking=False) as f:
            assert int(f.attrs["completed"]) == rows
            from_h5py = [int(v) for v in f["steps"][:rows]]
        with xr.open_dataset(out, engine="h5netcdf", driver_kwds={"locking": False}) as ds:
            assert list(ds.steps.values[:rows]) == from_h5py
        child = subprocess.run(
            [sys.executable, "-c", READ_LIVE, str(out)],
            capture_output=True,
            text=True,
            env=env,
            check=True,
            timeout=120,
        )
        assert child.stdout.split() == [str(rows), str(rows)]  # another process reads it too
        seen.append((rows, [int(v) for v in live["steps"]], from_h5py))

    result = compare(cases, output=out, threads=1, chunk_size=4, progress=progress)
    assert seen and seen[-1][0] == 40
    final = [int(v) for v in result["steps"]]
    for rows, from_ours, from_h5py in seen:
        assert from_ours == from_h5py == final[:rows]


def test_retain_changed_on_resume_is_refused_by_the_command_line(tmp_path, capsys):
    cases = table(tmp_path)
    out = tmp_path / "cli.h5"
    assert main(["sweep", str(cases), "-o", str(out), "--quiet", "--retain", "0.5"]) == 0
    before = out.read_bytes()
    assert main(["sweep", str(cases), "-o", str(out), "--quiet", "--retain", "0.9"]) != 0
    err = capsys.readouterr().err
    assert "retain=0.9" in err and "cannot change" in err and "Traceback" not in err
    assert out.read_bytes() == before  # the file is left as it was
    assert main(["sweep", str(cases), "-o", str(out), "--quiet", "--retain", "0.5"]) == 0
