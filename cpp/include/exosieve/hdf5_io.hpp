#pragma once
//! \file hdf5_io.hpp
//! Result files in HDF5, laid out so that h5py and xarray (engine="h5netcdf") read them.
//!
//! Layout (netCDF-4 style, written with the HDF5 C and dimension-scale APIs):
//! - every dimension has a coordinate dataset of the same name that is a dimension scale;
//!   variables have the scales of their dimensions attached, so readers see named dimensions;
//! - numbers are float64 or int64 (little-endian), text is variable-length UTF-8 (string
//!   coordinates such as species names select with `.sel(species="He")` in xarray);
//! - every dataset carries the string attributes `units` and `long_name` (string coordinates
//!   get units "1"); unit words that xarray would decode to timedelta or datetime ("seconds",
//!   "days since ...") are refused: write time in "s";
//! - global attributes: `exosieve_version`, `config` (the caller's JSON), `created` (UTC
//!   ISO-8601), and in appendable files `completed` (int64, see ResultAppender); integer
//!   attributes such as CF's `flag_values` are int64 arrays (set_attribute).
//!
//! Atomic replacement: a ResultWriter builds the file under a hidden temporary name in the
//! target's directory and renames it over the target on commit(), after an fsync; without
//! commit() the temporary is removed. A crash therefore leaves either the old file or the new
//! one in place, never a half-written one (a crashed process may leave a stale `.name.tmp-*`).
//!
//! Appending (long sweeps): variables declared with ResultWriter::add_case_variable have an
//! unlimited, chunked leading dimension `case`. A ResultAppender adds blocks of rows to them.
//! The `case` coordinate holds row numbers, or, after label_cases(), text labels (so that
//! xarray selects rows with `.sel(case="label")`) with the row numbers in the case variable
//! `row`.
//!
//! Recovery rule: the root attribute `completed` counts the rows of `case` that are complete.
//! Each append writes the rows of every case variable, flushes and fsyncs, and only then
//! raises `completed` (flushed and fsynced again). Rows at index >= `completed` are therefore
//! never trusted: a block cut short by a kill leaves `completed` at its old value, and reopening
//! the file with ResultAppender(path) cuts every case variable back to `completed` rows, so the
//! interrupted block is written again. Reopening also repairs the one metadata inconsistency a
//! kill during a flush was seen to leave (objects written past the end of allocation recorded
//! in the superblock). Readers of a file that is still being written, or that was killed and
//! not yet reopened by an appender, should use only the first `completed` rows and may fail.
//! Each append costs two fsyncs, so append blocks of many rows rather than single rows.
//! An appender holds HDF5's file lock; the readers here open without it, so they read a file
//! that a sweep is appending to (only its first `completed` rows; a read during an append may
//! fail and can be repeated) and never block an appender. h5py needs `locking=False` for that.
//! Numbers, appended rows too, are stored with Fletcher32 checksums; variable-length strings have
//! their heap references checked before they are read; text attributes are fixed-length (no
//! heap). Each append also records `completed_check` = [completed, hash of the committed rows in
//! the last, partly filled chunk of every numeric case variable]: a kill while such a chunk is
//! rewritten leaves it failing its checksum, and reopening rewrites it with a fresh checksum
//! when its committed rows match that hash, and refuses the file (naming the dataset) otherwise.
//! A reader whose chunk fails its checksum while another process holds the file lock reads it
//! again a few times, then throws FileError saying "read again".
//! ResultWriter replaces only an empty file or an exosieve result that no process has locked.
//! HDF5 1.10 has no crash-consistent metadata updates outside SWMR mode: a kill in the middle
//! of a flush can in principle damage the file's metadata; a flush per block keeps that window
//! short.

#include <cstddef>
#include <cstdint>
#include <map>
#include <memory>
#include <string>
#include <vector>

namespace exosieve {

//! The global `Conventions` attribute of exosieve's result files (the evolution file and the
//! sweep file): the layout of this header, version 1. It borrows CF's `units` (UDUNITS
//! strings), `long_name` and `flag_values`/`flag_meanings`, but is not CF: its string-valued
//! coordinate variables (species, ratio, case labels) are outside CF, which wants coordinate
//! variables numeric and monotonic.
inline constexpr const char* result_file_conventions = "exosieve-1";

//! Element type of a stored variable.
enum class ValueType { float64, int64, string };

//! Builds one result file and moves it into place atomically on commit().
class ResultWriter {
  public:
    //! Start a new file that replaces `path` on commit(); `config_json` becomes attribute "config".
    ResultWriter(const std::string& path, const std::string& config_json);
    //! Remove the temporary file unless commit() succeeded.
    ~ResultWriter();
    ResultWriter(const ResultWriter&) = delete;
    ResultWriter& operator=(const ResultWriter&) = delete;
    ResultWriter(ResultWriter&&) noexcept;
    ResultWriter& operator=(ResultWriter&&) noexcept;

    //! Float64 coordinate `name` (also the name of its dimension) [units as given].
    void add_coordinate(const std::string& name, const double* values, std::size_t count,
                        const std::string& units, const std::string& long_name);
    //! Int64 coordinate `name` (also the name of its dimension), e.g. sample numbers.
    void add_coordinate(const std::string& name, const std::int64_t* values, std::size_t count,
                        const std::string& units, const std::string& long_name);
    //! Float64 coordinate from a vector.
    void add_coordinate(const std::string& name, const std::vector<double>& values,
                        const std::string& units, const std::string& long_name) {
        add_coordinate(name, values.data(), values.size(), units, long_name);
    }
    //! Int64 coordinate from a vector.
    void add_coordinate(const std::string& name, const std::vector<std::int64_t>& values,
                        const std::string& units, const std::string& long_name) {
        add_coordinate(name, values.data(), values.size(), units, long_name);
    }
    //! String coordinate (variable-length UTF-8), e.g. species names; units "1".
    void add_coordinate(const std::string& name, const std::vector<std::string>& values,
                        const std::string& long_name);

    //! Float64 variable over existing dimensions `dims` (empty: scalar), row-major `data`.
    void add_variable(const std::string& name, const std::vector<std::string>& dims,
                      const double* data, std::size_t count, const std::string& units,
                      const std::string& long_name);
    //! Int64 variable (counts, regime codes, flags), row-major `data`.
    void add_variable(const std::string& name, const std::vector<std::string>& dims,
                      const std::int64_t* data, std::size_t count, const std::string& units,
                      const std::string& long_name);
    //! String variable (variable-length UTF-8), row-major `data`.
    void add_variable(const std::string& name, const std::vector<std::string>& dims,
                      const std::vector<std::string>& data, const std::string& units,
                      const std::string& long_name);
    //! Float64 variable from a vector.
    void add_variable(const std::string& name, const std::vector<std::string>& dims,
                      const std::vector<double>& data, const std::string& units,
                      const std::string& long_name) {
        add_variable(name, dims, data.data(), data.size(), units, long_name);
    }
    //! Int64 variable from a vector.
    void add_variable(const std::string& name, const std::vector<std::string>& dims,
                      const std::vector<std::int64_t>& data, const std::string& units,
                      const std::string& long_name) {
        add_variable(name, dims, data.data(), data.size(), units, long_name);
    }

    //! Declare a variable along the appendable dimension `case`, then `trailing_dims`.
    //! It starts with no rows; rows come from a ResultAppender. The first call creates the
    //! int64 coordinate `case` and the global attribute `completed` = 0.
    void add_case_variable(const std::string& name, ValueType type,
                           const std::vector<std::string>& trailing_dims, const std::string& units,
                           const std::string& long_name);

    //! Make the appendable coordinate `case` hold text labels (variable-length UTF-8, units
    //! "1", described by `long_name`; labels may repeat) and the row numbers an int64 case
    //! variable `row`. Must come before the first add_case_variable; every RowBlock then sets
    //! "case", and "row" is numbered like an unlabelled `case` unless the block sets it.
    void label_cases(const std::string& long_name);

    //! Global string attribute (not `completed`, which the appender owns).
    void set_attribute(const std::string& name, const std::string& value);
    //! String attribute on an existing dataset ("" or "/" means the file).
    void set_attribute(const std::string& dataset, const std::string& name,
                       const std::string& value);
    //! Int64 array attribute (at least one value) on an existing dataset or the file ("" or
    //! "/"), e.g. CF's `flag_values`, which must have the variable's type.
    void set_attribute(const std::string& dataset, const std::string& name,
                       const std::vector<std::int64_t>& values);

    //! Shape of a variable over `dims` (InputError naming `variable` for unknown dims).
    std::vector<std::size_t> shape_of(const std::string& variable,
                                      const std::vector<std::string>& dims) const;

    //! Close, fsync and atomically rename the file over the target; nothing may follow.
    void commit();
    //! Give up: close and remove the temporary file; the target is left as it was.
    void discard();
    //! True until commit() or discard() (false after a move).
    bool is_open() const;
    //! The target path.
    const std::string& path() const;

  private:
    friend class ResultAppender;
    struct Impl;
    Impl& live() const; // throws InputError after a move or commit()
    std::unique_ptr<Impl> impl_;
};

//! Rows for every case variable of an appendable file, `rows` consecutive cases.
class RowBlock {
  public:
    //! An empty block of `rows` rows; fill each case variable with set().
    explicit RowBlock(std::size_t rows);
    //! Number of rows [cases].
    std::size_t rows() const { return rows_; }
    //! Make the block `rows` rows long with every column empty, keeping the columns' storage,
    //! so that refilling a block with set() from pointers allocates nothing.
    void reset(std::size_t rows);
    //! Float64 values of `name`, rows x trailing shape, row-major (copied, into the column's
    //! storage if it exists).
    void set(const std::string& name, const double* data, std::size_t count);
    //! Int64 values of `name`, rows x trailing shape, row-major (copied as above); "case" may
    //! be set to case identifiers, otherwise it gets the row numbers.
    void set(const std::string& name, const std::int64_t* data, std::size_t count);
    //! String values (UTF-8, no NUL), copied as above.
    void set(const std::string& name, const std::string* data, std::size_t count);
    //! Float64 values from a vector.
    void set(const std::string& name, std::vector<double> data);
    //! Int64 values from a vector.
    void set(const std::string& name, std::vector<std::int64_t> data);
    //! String values (UTF-8, no NUL) from a vector.
    void set(const std::string& name, std::vector<std::string> data);

  private:
    friend class ResultAppender;
    struct Column {
        ValueType type = ValueType::float64;
        std::vector<double> f;
        std::vector<std::int64_t> i;
        std::vector<std::string> s;
        std::size_t count() const;
    };
    std::size_t rows_;
    std::map<std::string, Column> columns_;
};

//! Appends blocks of rows along `case` to a result file; see the file comment for recovery.
class ResultAppender {
  public:
    //! Commit a writer that declared case variables, then open the new file for appending.
    explicit ResultAppender(ResultWriter&& schema);
    //! Reopen an appendable file to continue it; rows past `completed` are cut off.
    explicit ResultAppender(const std::string& path);
    //! Close the file (errors are swallowed; call close() to see them).
    ~ResultAppender();
    ResultAppender(const ResultAppender&) = delete;
    ResultAppender& operator=(const ResultAppender&) = delete;
    ResultAppender(ResultAppender&&) noexcept;
    ResultAppender& operator=(ResultAppender&&) noexcept;

    //! Write `block` after the completed rows, flush, fsync, then raise `completed`.
    void append(const RowBlock& block);
    //! Rows that are complete on disk [cases].
    std::size_t completed() const;
    //! Rows of an interrupted block that reopening cut off (0 for a new file) [cases].
    std::size_t discarded_rows() const;
    //! True if reopening repaired what a kill left: a file longer than its recorded end of
    //! allocation (the allocation is extended to keep what was written), or a last chunk that
    //! fails its checksum while its committed rows match `completed_check` (rewritten).
    bool repaired() const;
    //! Trailing shape (without `case`) of a case variable; InputError if unknown.
    std::vector<std::size_t> row_shape(const std::string& name) const;
    //! Element type of a case variable; InputError if unknown.
    ValueType type_of(const std::string& name) const;
    //! Names of the case variables, `case` included, sorted.
    std::vector<std::string> case_variables() const;
    //! Close the file; later appends throw. Safe to call twice.
    void close();
    //! The file path.
    const std::string& path() const;

  private:
    struct Impl;
    Impl& live() const; // throws InputError after a move or close()
    Impl& any() const;  // throws InputError after a move
    std::unique_ptr<Impl> impl_;
};

//! Read a float64 dataset, flattened row-major; its shape goes to `shape` if given.
std::vector<double> read_doubles(const std::string& path, const std::string& dataset,
                                 std::vector<std::size_t>* shape = nullptr);
//! Read an int64 (any integer) dataset, flattened row-major.
std::vector<std::int64_t> read_int64s(const std::string& path, const std::string& dataset,
                                      std::vector<std::size_t>* shape = nullptr);
//! Read a string dataset (variable- or fixed-length), flattened row-major.
std::vector<std::string> read_strings(const std::string& path, const std::string& dataset,
                                      std::vector<std::size_t>* shape = nullptr);
//! Read a string attribute of the file ("" or "/") or of a dataset.
std::string read_attribute(const std::string& path, const std::string& object,
                           const std::string& name);
//! Read an integer attribute of the file ("" or "/") or of a dataset.
std::int64_t read_int_attribute(const std::string& path, const std::string& object,
                                const std::string& name);
//! True if another open file description holds a lock on `path` (HDF5 writers lock their file).
bool file_is_locked(const std::string& path);

//! True if the file at `path` holds a dataset named `dataset` (files of earlier versions may
//! lack variables that later ones write).
bool has_dataset(const std::string& path, const std::string& dataset);

//! True if the file ("" or "/") or the dataset `object` of the file at `path` has an attribute
//! `name` (files of earlier versions may lack attributes that later ones write).
bool has_attribute(const std::string& path, const std::string& object, const std::string& name);

//! Names of the dimension scales attached to each dimension of `dataset` ("" if none).
std::vector<std::string> read_dimensions(const std::string& path, const std::string& dataset);

} // namespace exosieve
