#pragma once
//! \file sweep_file.hpp
//! The HDF5 file of a sweep: its coordinates and case variables (the one list that the batch
//! engine's chunks, Python's file declaration, readers, range checks and xarray views all
//! follow), and a chunk as rows of it.

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "exosieve/batch.hpp"
#include "exosieve/file_schema.hpp"
#include "exosieve/hdf5_io.hpp"

namespace exosieve {

//! A case variable of a sweep file (dimensions after `case`; `present_when` is "samples" for
//! files with Monte Carlo samples, "inputs" for those that also have uncertain inputs) and the
//! member of BatchChunk that holds it: exactly one of f, i, s is set.
struct SweepVariable {
    FileVariable file;                                  //!< name, type, dims, units, ...
    std::vector<double> BatchChunk::*f = nullptr;       //!< float64 values
    std::vector<std::int64_t> BatchChunk::*i = nullptr; //!< int64 values
    std::vector<std::string> BatchChunk::*s = nullptr;  //!< string values
};

//! Coordinates of a sweep file: case (the case names), row (the table row of each case, a case
//! variable), species, time [s], sample, input; then input_unit, the text variable beside
//! `input` with each input's SI unit.
const std::vector<FileCoordinate>& sweep_file_coordinates();

//! The case variables of a sweep file besides `case` and `row`, in file order.
const std::vector<SweepVariable>& sweep_file_variables();

//! One case variable of a chunk under its name in sweep files: `count` rows, each of shape
//! `trailing` (e.g. {times, species}), row-major; exactly one of f, i, s is set.
struct ChunkVariable {
    const char* name;                             //!< e.g. "retained_fraction"
    std::vector<std::size_t> trailing;            //!< shape of one row (empty: a scalar per case)
    const std::vector<double>* f = nullptr;       //!< float64 values
    const std::vector<std::int64_t>* i = nullptr; //!< int64 values
    const std::vector<std::string>* s = nullptr;  //!< string values
};

//! The case variables of sweep_file_variables() that a file of this chunk has (the sample
//! ones with samples, the input ones with samples and inputs), pointing into `chunk`.
std::vector<ChunkVariable> chunk_variables(const BatchChunk& chunk);

//! A chunk as rows of a sweep file: `case` (the names, the labels of the file's `case`
//! coordinate), `row` (the keys) and chunk_variables(). Written straight from C++, a chunk
//! costs the file no interpreter objects.
RowBlock chunk_rows(const BatchChunk& chunk);
//! The same rows written into `into` (reset to the chunk's rows first), reusing its storage.
void chunk_rows(const BatchChunk& chunk, RowBlock& into);

} // namespace exosieve
