#pragma once
//! \file hdf5_io.hpp
//! Result files in HDF5, laid out so that h5py and xarray (engine="h5netcdf") read them:
//! coordinate datasets are dimension scales named after their dimension, every variable
//! carries CF-style `units` and `long_name`, the file carries global attributes
//! (library version, model configuration as JSON, creation time).
//!
//! Writes are atomic: a ResultWriter writes to a temporary file beside the target and
//! renames it over the target on commit(); without commit() the temporary is removed.

#include <cstddef>
#include <memory>
#include <string>
#include <vector>

namespace exosieve {

//! Writes one result file; see the file comment for the layout and the atomic replacement.
class ResultWriter {
  public:
    //! Start a new file that will replace `path` on commit().
    explicit ResultWriter(const std::string& path);
    ~ResultWriter();
    ResultWriter(const ResultWriter&) = delete;
    ResultWriter& operator=(const ResultWriter&) = delete;

    //! Numeric coordinate: dataset `name` that is also the dimension `name`.
    void add_coordinate(const std::string& name, const std::vector<double>& values,
                        const std::string& units, const std::string& long_name);
    //! String coordinate (variable-length UTF-8), e.g. species names or case labels.
    void add_coordinate(const std::string& name, const std::vector<std::string>& values,
                        const std::string& long_name);
    //! Extendable coordinate along an unlimited dimension (for appending chunks).
    void add_extendable_coordinate(const std::string& name, const std::string& units,
                                   const std::string& long_name);

    //! Float64 variable with dimensions `dims` (existing coordinates), row-major `data`.
    void add_variable(const std::string& name, const std::vector<std::string>& dims,
                      const std::vector<double>& data, const std::string& units,
                      const std::string& long_name);
    //! Int64 variable (counts, regime codes, flags).
    void add_variable(const std::string& name, const std::vector<std::string>& dims,
                      const std::vector<long long>& data, const std::string& units,
                      const std::string& long_name);

    //! Global string attribute (e.g. "config" holding JSON).
    void set_attribute(const std::string& name, const std::string& value);
    //! String attribute on an existing dataset.
    void set_attribute(const std::string& dataset, const std::string& name,
                       const std::string& value);

    //! Close and atomically move the file into place; nothing may be added afterwards.
    void commit();

  private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
};

//! Read back a float64 dataset (flattened, row-major) and its shape.
std::vector<double> read_doubles(const std::string& path, const std::string& dataset,
                                 std::vector<std::size_t>* shape = nullptr);
//! Read back a string attribute of the file ("/") or of a dataset.
std::string read_attribute(const std::string& path, const std::string& object,
                           const std::string& name);

} // namespace exosieve
