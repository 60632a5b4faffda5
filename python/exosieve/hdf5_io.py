"""Result files in HDF5 that h5py and xarray (``engine="h5netcdf"``) both read.

Layout: every dimension has a coordinate dataset of the same name (an HDF5 dimension scale),
variables have the scales of their dimensions attached, numbers are float64 or int64, text is
variable-length UTF-8 (so ``ds.sel(species="He")`` works), and every dataset carries ``units``
and ``long_name``. Global attributes: ``exosieve_version``, ``config`` (JSON), ``created``
(UTC, ISO-8601). Write times in units ``"s"``: unit words such as ``"seconds"`` are refused
because xarray would decode them to ``timedelta64``, which overflows past 292 years.

:class:`ResultWriter` builds a file under a temporary name beside the target and renames it
over the target on ``commit()`` (or at the end of a ``with`` block without an exception), so a
crash never leaves a half-written file in place of a good one.

Long sweeps declare variables with ``add_case_variable``: they grow along the unlimited
dimension ``case``. :class:`ResultAppender` appends blocks of rows; each block is written and
fsynced before the global attribute ``completed`` is raised, and reopening a file with
``ResultAppender(path)`` cuts off rows past ``completed`` (a block interrupted by a kill), so the
sweep resumes at row ``completed``; it also repairs the file's end of allocation when a kill
during a flush left it short. Reopen a killed file with an appender before reading it.
HDF5 failures raise :class:`FileError` (an ``OSError``); bad arguments raise ``ValueError``.

Examples
--------
>>> import tempfile, pathlib
>>> import numpy as np
>>> import xarray as xr
>>> from exosieve.hdf5_io import ResultAppender, ResultWriter
>>> folder = tempfile.TemporaryDirectory()
>>> path = pathlib.Path(folder.name) / "sweep.h5"
>>> schema = ResultWriter(path, {"model": "demo"})
>>> schema.add_coordinate("species", ["H", "He"], long_name="species name")
>>> schema.add_case_variable("flux", float, ["species"], units="m-2 s-1", long_name="Jeans flux")
>>> with ResultAppender(schema) as sweep:
...     sweep.append({"flux": np.array([[1e12, 3e7], [2e12, 5e7], [4e12, 1e8]])})
...     sweep.completed
3
>>> with xr.open_dataset(path, engine="h5netcdf") as ds:
...     print(ds.flux.sel(species="He").values, ds.flux.attrs["units"])
[3.e+07 5.e+07 1.e+08] m-2 s-1
>>> folder.cleanup()
"""

from __future__ import annotations

from ._core import (
    FileError,
    ResultAppender,
    ResultWriter,
    file_is_locked,
    has_dataset,
    read_attribute,
    read_dimensions,
    read_doubles,
    read_int64s,
    read_int_attribute,
    read_strings,
)

__all__ = [
    "FileError",
    "ResultAppender",
    "ResultWriter",
    "file_is_locked",
    "has_dataset",
    "read_attribute",
    "read_dimensions",
    "read_doubles",
    "read_int64s",
    "read_int_attribute",
    "read_strings",
]
