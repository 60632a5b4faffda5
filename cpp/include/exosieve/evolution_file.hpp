#pragma once
//! \file evolution_file.hpp
//! The HDF5 file of one evolution run: its coordinates and variables (the one list that the
//! writer, Python's reader and its xarray view all follow) and the writer.

#include <string>
#include <vector>

#include "exosieve/evolution.hpp"
#include "exosieve/file_schema.hpp"

namespace exosieve {

//! Coordinates of an evolution file: time [s], species, ratio (with isotope ratios).
const std::vector<FileCoordinate>& evolution_file_coordinates();

//! Variables of an evolution file, in file order. `present_when` is "ratios" (the run has
//! isotope ratios) or "envelope" (it has an H/He envelope) for those that only such runs have.
//! `regime` has CF flags.
const std::vector<FileVariable>& evolution_file_variables();

//! Write a result to an HDF5 file at `path` (atomically: temporary file, then rename), with
//! the variables of evolution_file_variables(), units and long_name on every one, and the
//! global attributes `config` (model JSON), `regime_changes` (JSON list), `stepper`, `title`
//! and `Conventions`. InputError if an array's size does not match its dimensions.
void write_result(const EvolutionResult& result, const std::string& path);

//! Read a file written by write_result back into a result (its inverse). A file of an earlier
//! version that lacks the given-loss rates or the loss ledger reads as no given loss (0) and an
//! unknown ledger (NaN). InputError or FileError for a file that is not such a result.
EvolutionResult read_result(const std::string& path);

} // namespace exosieve
