#include "exosieve/hdf5_io.hpp"

#include <hdf5.h>
#include <hdf5_hl.h>

#include <algorithm>
#include <array>
#include <atomic>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <limits>
#include <random>
#include <set>
#include <sstream>

#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include "exosieve/errors.hpp"

#ifndef EXOSIEVE_VERSION
#define EXOSIEVE_VERSION "unknown"
#endif

namespace exosieve {

bool file_is_locked(const std::string& path) {
    const int fd = ::open(path.c_str(), O_RDONLY);
    if (fd < 0)
        return false;
    // HDF5 locks with flock(): exclusive for writers, shared for locking readers.
    const bool locked = ::flock(fd, LOCK_EX | LOCK_NB) != 0 && errno == EWOULDBLOCK;
    if (!locked)
        ::flock(fd, LOCK_UN);
    ::close(fd);
    return locked;
}

namespace {

namespace fs = std::filesystem;

const char* const case_dim = "case";
// The row numbers of a file whose `case` coordinate holds text labels (label_cases).
const char* const row_variable = "row";
const char* const completed_attr = "completed";
// [completed, tail hash]: vouches for the committed rows of each case variable's last, partly
// filled chunk (see ResultAppender::Impl::check_tails).
const char* const tail_check_attr = "completed_check";
// Longer text attributes are stored as variable-length strings (in a global heap): an object
// header message holds at most 64 KiB.
const std::size_t max_inline_attribute = 32768;

// ---------------------------------------------------------------- HDF5 errors and handles

// Silences HDF5's own error printing on this thread (the library is thread-safe, so the
// setting is per thread) and restores the caller's setting on exit.
class QuietHdf5 {
  public:
    QuietHdf5() {
        H5Eget_auto2(H5E_DEFAULT, &func_, &data_);
        H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr);
    }
    ~QuietHdf5() { H5Eset_auto2(H5E_DEFAULT, func_, data_); }
    QuietHdf5(const QuietHdf5&) = delete;
    QuietHdf5& operator=(const QuietHdf5&) = delete;

  private:
    H5E_auto2_t func_ = nullptr;
    void* data_ = nullptr;
};

herr_t keep_innermost(unsigned n, const H5E_error2_t* error, void* out) {
    if (n == 0 && error->desc != nullptr)
        *static_cast<std::string*>(out) = error->desc;
    return 0;
}

// The most specific message on this thread's HDF5 error stack.
std::string hdf5_detail() {
    std::string detail;
    H5Ewalk2(H5E_DEFAULT, H5E_WALK_UPWARD, keep_innermost, &detail);
    return detail.empty() ? std::string("no detail from HDF5") : detail;
}

[[noreturn]] void fail(const std::string& what) {
    throw FileError("HDF5 could not " + what + ": " + hdf5_detail());
}

void check(herr_t status, const std::string& what) {
    if (status < 0)
        fail(what);
}

// Owns one HDF5 identifier.
class Handle {
  public:
    using Closer = herr_t (*)(hid_t);
    Handle() = default;
    Handle(hid_t id, Closer closer) : id_(id), closer_(closer) {}
    ~Handle() { reset(); }
    Handle(Handle&& other) noexcept : id_(other.id_), closer_(other.closer_) {
        other.id_ = H5I_INVALID_HID;
    }
    Handle& operator=(Handle&& other) noexcept {
        if (this != &other) {
            reset();
            id_ = other.id_;
            closer_ = other.closer_;
            other.id_ = H5I_INVALID_HID;
        }
        return *this;
    }
    Handle(const Handle&) = delete;
    Handle& operator=(const Handle&) = delete;

    hid_t get() const { return id_; }
    bool valid() const { return id_ >= 0; }
    void reset() { static_cast<void>(close()); }
    //! Close now and report HDF5's status (negative on failure).
    herr_t close() {
        herr_t status = 0;
        if (id_ >= 0 && closer_ != nullptr)
            status = closer_(id_);
        id_ = H5I_INVALID_HID;
        return status;
    }

  private:
    hid_t id_ = H5I_INVALID_HID;
    Closer closer_ = nullptr;
};

Handle checked(hid_t id, Handle::Closer closer, const std::string& what) {
    if (id < 0)
        fail(what);
    return Handle(id, closer);
}

Handle utf8_string_type() {
    Handle type = checked(H5Tcopy(H5T_C_S1), H5Tclose, "copy the C string type");
    check(H5Tset_size(type.get(), H5T_VARIABLE), "make a variable-length string type");
    check(H5Tset_cset(type.get(), H5T_CSET_UTF8), "set the UTF-8 character set");
    return type;
}

// Writers lock the file (when the file system can; they carry on where it cannot, as on some
// cluster file systems). Readers take no lock: they may read a file that a sweep is appending
// to (only its first `completed` rows are trusted), and they never block a writer.
Handle file_access(bool lock = true) {
    Handle fapl = checked(H5Pcreate(H5P_FILE_ACCESS), H5Pclose, "create a file-access list");
#if H5_VERSION_GE(1, 10, 7)
    check(H5Pset_file_locking(fapl.get(), lock, true), "configure file locking");
#else
    static_cast<void>(lock);
#endif
    return fapl;
}

std::string in_quotes(const std::string& s) {
    return "'" + s + "'";
}

// ---------------------------------------------------------------- argument checks

void check_text(const std::string& what, const std::string& value) {
    if (value.find('\0') != std::string::npos)
        throw InputError(what + " contains a NUL character");
}

void check_object_name(const std::string& what, const std::string& name) {
    if (name.empty())
        throw InputError(what + " name is empty");
    if (name.find('/') != std::string::npos || name == "." || name == "..")
        throw InputError(what + " name " + in_quotes(name) +
                         " must not contain '/' or be '.'/'..'");
    check_text(what + " name " + in_quotes(name), name);
}

// Units and long_name are required; refuse unit words that xarray decodes to time types.
void check_description(const std::string& name, const std::string& units,
                       const std::string& long_name) {
    if (units.empty())
        throw InputError("variable " + in_quotes(name) +
                         ": units are empty (use \"1\" for "
                         "dimensionless values)");
    if (long_name.empty())
        throw InputError("variable " + in_quotes(name) + ": long_name is empty");
    check_text("units of " + in_quotes(name), units);
    check_text("long_name of " + in_quotes(name), long_name);
    static const std::set<std::string> timedelta_words = {
        "days", "hours", "minutes", "seconds", "milliseconds", "microseconds", "nanoseconds"};
    if (timedelta_words.count(units) != 0)
        throw InputError("variable " + in_quotes(name) + ": units " + in_quotes(units) +
                         " make xarray decode the values to timedelta64, which overflows past "
                         "292 years; use \"s\"");
    if (units.find(" since ") != std::string::npos)
        throw InputError("variable " + in_quotes(name) + ": units " + in_quotes(units) +
                         " make xarray decode the values to datetimes; use \"s\"");
}

void check_strings(const std::string& name, const std::string* values, std::size_t count) {
    for (std::size_t i = 0; i < count; ++i)
        if (values[i].find('\0') != std::string::npos)
            throw InputError("variable " + in_quotes(name) + ": string " + std::to_string(i) +
                             " contains a NUL character");
}

void check_strings(const std::string& name, const std::vector<std::string>& values) {
    check_strings(name, values.data(), values.size());
}

std::string shape_text(const std::vector<std::string>& dims, const std::vector<hsize_t>& shape) {
    std::string text = "(";
    for (std::size_t i = 0; i < dims.size(); ++i)
        text += (i ? ", " : "") + dims[i] + "=" + std::to_string(shape[i]);
    return text + ")";
}

std::size_t product(const std::vector<hsize_t>& shape) {
    std::size_t n = 1;
    for (hsize_t s : shape)
        n *= static_cast<std::size_t>(s);
    return n;
}

// ---------------------------------------------------------------- file-system helpers

void sync_path(const std::string& path, bool directory) {
    const int fd = ::open(path.c_str(), O_RDONLY | (directory ? O_DIRECTORY : 0));
    if (fd < 0) {
        if (directory)
            return; // some systems do not open directories; the rename is still atomic
        throw FileError("could not open " + in_quotes(path) +
                        " to sync it: " + std::strerror(errno));
    }
    const int status = ::fsync(fd);
    const int error = errno;
    ::close(fd);
    // Directories on some file systems refuse fsync; file data is what must be durable.
    if (status != 0 && !directory)
        throw FileError("could not fsync " + in_quotes(path) + ": " + std::strerror(error));
}

std::string directory_of(const std::string& path) {
    const fs::path parent = fs::path(path).parent_path();
    return parent.empty() ? std::string(".") : parent.string();
}

std::string locked_message(const std::string& path) {
    return in_quotes(path) +
           " is locked: another process has it open for writing (a running sweep?); it "
           "was left alone. Wait for that process to end, or write elsewhere";
}

// True if a file begins with the HDF5 signature and carries the root attribute
// `exosieve_version` that every ResultWriter writes.
bool is_exosieve_result(const std::string& path) {
    {
        const int fd = ::open(path.c_str(), O_RDONLY);
        if (fd < 0)
            return false;
        unsigned char head[8] = {0};
        const ssize_t n = ::pread(fd, head, sizeof head, 0);
        ::close(fd);
        static const unsigned char signature[8] = {0x89, 'H', 'D', 'F', '\r', '\n', 0x1a, '\n'};
        if (n != 8 || std::memcmp(head, signature, 8) != 0)
            return false;
    }
    QuietHdf5 quiet;
    for (bool lock : {false, true}) { // locked: the file may be open in this process already
        Handle fapl = file_access(lock);
        const hid_t file = H5Fopen(path.c_str(), H5F_ACC_RDONLY, fapl.get());
        if (file >= 0) {
            Handle owner(file, H5Fclose);
            return H5Aexists(file, "exosieve_version") > 0;
        }
    }
    return false;
}

void check_replaceable(const std::string& path) {
    std::error_code ec;
    if (!fs::exists(path, ec))
        return;
    if (!fs::is_regular_file(path, ec))
        throw InputError("path " + in_quotes(path) + " is not a regular file; it was left alone");
    if (file_is_locked(path))
        throw FileError(locked_message(path));
    if (fs::file_size(path, ec) == 0 && !ec)
        return;
    if (!is_exosieve_result(path))
        throw InputError(in_quotes(path) +
                         " exists and is not an exosieve result file; it was left alone "
                         "(only exosieve's own result files are ever replaced): choose another "
                         "path");
}

// Checks the target before any work: a file name in an existing directory, and no file there
// but an exosieve result that no other process is writing (an empty file holds nothing).
void check_target(const std::string& path) {
    if (path.empty())
        throw InputError("path is empty");
    check_text("path", path);
    const fs::path p(path);
    if (!p.has_filename())
        throw InputError("path " + in_quotes(path) + " names no file");
    std::error_code ec;
    if (!fs::is_directory(directory_of(path), ec))
        throw InputError("path " + in_quotes(path) + ": directory " +
                         in_quotes(directory_of(path)) + " does not exist");
    if (fs::is_directory(p, ec))
        throw InputError("path " + in_quotes(path) + " is a directory");
    check_replaceable(path);
}

std::string temporary_beside(const std::string& target) {
    static std::atomic<unsigned> counter{0};
    std::random_device random;
    std::ostringstream name;
    name << '.' << fs::path(target).filename().string() << ".tmp-" << ::getpid() << '-' << counter++
         << '-' << std::hex << random();
    return (fs::path(target).parent_path() / name.str()).string();
}

std::string utc_now() {
    const std::time_t now = std::time(nullptr);
    std::tm utc{};
    gmtime_r(&now, &utc);
    char text[32];
    std::strftime(text, sizeof text, "%Y-%m-%dT%H:%M:%SZ", &utc);
    return text;
}

// ---------------------------------------------------------------- attributes

void write_string_attribute(hid_t object, const std::string& name, const std::string& value,
                            const std::string& where) {
    const std::string what = "write attribute " + in_quotes(name) + " of " + where;
    const htri_t exists = H5Aexists(object, name.c_str());
    check(exists, what);
    if (exists > 0)
        check(H5Adelete(object, name.c_str()), what);
    Handle space = checked(H5Screate(H5S_SCALAR), H5Sclose, what);
    if (value.size() > max_inline_attribute) { // too long for the object header
        Handle type = utf8_string_type();
        Handle attribute = checked(
            H5Acreate2(object, name.c_str(), type.get(), space.get(), H5P_DEFAULT, H5P_DEFAULT),
            H5Aclose, what);
        const char* text = value.c_str();
        check(H5Awrite(attribute.get(), type.get(), &text), what);
        return;
    }
    // Fixed-length text lives in the object header, not in a global heap, so reading it cannot
    // follow a damaged heap reference (netCDF-C writes text attributes the same way).
    Handle type = checked(H5Tcopy(H5T_C_S1), H5Tclose, what);
    check(H5Tset_size(type.get(), std::max<std::size_t>(value.size(), 1)), what);
    check(H5Tset_strpad(type.get(), H5T_STR_NULLPAD), what);
    check(H5Tset_cset(type.get(), H5T_CSET_UTF8), what);
    Handle attribute =
        checked(H5Acreate2(object, name.c_str(), type.get(), space.get(), H5P_DEFAULT, H5P_DEFAULT),
                H5Aclose, what);
    std::string padded = value;
    padded.resize(std::max<std::size_t>(value.size(), 1), '\0');
    check(H5Awrite(attribute.get(), type.get(), padded.data()), what);
}

// Writes in place when the attribute exists, so an update touches a single object header.
void write_int_attribute(hid_t object, const std::string& name, std::int64_t value,
                         const std::string& where) {
    const std::string what = "write attribute " + in_quotes(name) + " of " + where;
    const htri_t exists = H5Aexists(object, name.c_str());
    check(exists, what);
    Handle attribute;
    if (exists > 0) {
        attribute = checked(H5Aopen(object, name.c_str(), H5P_DEFAULT), H5Aclose, what);
    } else {
        Handle space = checked(H5Screate(H5S_SCALAR), H5Sclose, what);
        attribute = checked(
            H5Acreate2(object, name.c_str(), H5T_STD_I64LE, space.get(), H5P_DEFAULT, H5P_DEFAULT),
            H5Aclose, what);
    }
    check(H5Awrite(attribute.get(), H5T_NATIVE_INT64, &value), what);
}

void write_int_array_attribute(hid_t object, const std::string& name,
                               const std::vector<std::int64_t>& values, const std::string& where) {
    const std::string what = "write attribute " + in_quotes(name) + " of " + where;
    const htri_t exists = H5Aexists(object, name.c_str());
    check(exists, what);
    if (exists > 0)
        check(H5Adelete(object, name.c_str()), what);
    const hsize_t count = values.size();
    Handle space = checked(H5Screate_simple(1, &count, nullptr), H5Sclose, what);
    Handle attribute = checked(
        H5Acreate2(object, name.c_str(), H5T_STD_I64LE, space.get(), H5P_DEFAULT, H5P_DEFAULT),
        H5Aclose, what);
    check(H5Awrite(attribute.get(), H5T_NATIVE_INT64, values.data()), what);
}

void write_int_pair_attribute(hid_t object, const std::string& name,
                              const std::array<std::int64_t, 2>& values, const std::string& where) {
    const std::string what = "write attribute " + in_quotes(name) + " of " + where;
    const htri_t exists = H5Aexists(object, name.c_str());
    check(exists, what);
    Handle attribute;
    if (exists > 0) {
        attribute = checked(H5Aopen(object, name.c_str(), H5P_DEFAULT), H5Aclose, what);
    } else {
        const hsize_t two = 2;
        Handle space = checked(H5Screate_simple(1, &two, nullptr), H5Sclose, what);
        attribute = checked(
            H5Acreate2(object, name.c_str(), H5T_STD_I64LE, space.get(), H5P_DEFAULT, H5P_DEFAULT),
            H5Aclose, what);
    }
    check(H5Awrite(attribute.get(), H5T_NATIVE_INT64, values.data()), what);
}

void describe(hid_t dataset, const std::string& name, const std::string& units,
              const std::string& long_name) {
    write_string_attribute(dataset, "units", units, "dataset " + in_quotes(name));
    write_string_attribute(dataset, "long_name", long_name, "dataset " + in_quotes(name));
}

// ---------------------------------------------------------------- datasets

hid_t file_type_of(ValueType type, const Handle& string_type) {
    switch (type) {
    case ValueType::float64:
        return H5T_IEEE_F64LE;
    case ValueType::int64:
        return H5T_STD_I64LE;
    case ValueType::string:
        return string_type.get();
    }
    return H5T_IEEE_F64LE;
}

hid_t memory_type_of(ValueType type, const Handle& string_type) {
    switch (type) {
    case ValueType::float64:
        return H5T_NATIVE_DOUBLE;
    case ValueType::int64:
        return H5T_NATIVE_INT64;
    case ValueType::string:
        return string_type.get();
    }
    return H5T_NATIVE_DOUBLE;
}

const char* type_name(ValueType type) {
    switch (type) {
    case ValueType::float64:
        return "float64";
    case ValueType::int64:
        return "int64";
    case ValueType::string:
        return "string";
    }
    return "?";
}

// Raw pointer to write: numbers as they are, strings as an array of C strings.
struct Payload {
    ValueType type;
    const void* data;
    std::vector<const char*> text; // backs `data` for strings

    static Payload of(const double* p) { return {ValueType::float64, p, {}}; }
    static Payload of(const std::int64_t* p) { return {ValueType::int64, p, {}}; }
    static Payload of(const std::vector<std::string>& values) {
        Payload payload{ValueType::string, nullptr, {}};
        payload.text.reserve(values.size());
        for (const std::string& s : values)
            payload.text.push_back(s.c_str());
        payload.data = payload.text.data();
        return payload;
    }
};

Handle create_dataset(hid_t file, const std::string& name, ValueType type,
                      const std::vector<hsize_t>& shape, bool appendable,
                      const std::string& where) {
    const std::string what = "create dataset " + in_quotes(name) + " in " + where;
    Handle string_type = utf8_string_type();
    Handle dcpl = checked(H5Pcreate(H5P_DATASET_CREATE), H5Pclose, what);
    std::vector<hsize_t> maximum = shape;
    if (appendable)
        maximum[0] = H5S_UNLIMITED;
    if (!shape.empty() && (appendable || product(shape) > 0)) {
        // Chunks of about 64 KiB, numbers with a Fletcher32 checksum, so that damaged bytes are
        // refused on reading instead of read as values. No compression: rewriting a partly
        // filled chunk gives a chunk of the same size, which stays where it is.
        std::size_t row_bytes = type == ValueType::string ? 16 : 8;
        std::vector<hsize_t> chunk = shape;
        for (std::size_t i = 1; i < shape.size(); ++i) {
            chunk[i] = std::max<hsize_t>(shape[i], 1);
            row_bytes *= static_cast<std::size_t>(chunk[i]);
        }
        const std::size_t rows = std::clamp<std::size_t>(65536 / row_bytes, 1, 65536);
        chunk[0] = appendable ? static_cast<hsize_t>(rows)
                              : std::clamp<hsize_t>(shape[0], 1, static_cast<hsize_t>(rows));
        check(H5Pset_chunk(dcpl.get(), static_cast<int>(chunk.size()), chunk.data()), what);
        // HDF5 1.10 applies no filter to variable-length data; string references are checked
        // on reading instead (check_string_heaps). A kill while an appendable dataset's last
        // chunk is rewritten can leave that chunk failing its checksum with its committed rows
        // intact: ResultAppender::Impl::check_tails recognises and repairs that case.
        if (type != ValueType::string)
            check(H5Pset_fletcher32(dcpl.get()), what);
    }
    if (appendable) {
        if (type == ValueType::float64) {
            // Rows past `completed` read as NaN, not as plausible zeros.
            const double nan = std::numeric_limits<double>::quiet_NaN();
            check(H5Pset_fill_value(dcpl.get(), H5T_NATIVE_DOUBLE, &nan), what);
        }
    }
    Handle space = checked(shape.empty() ? H5Screate(H5S_SCALAR)
                                         : H5Screate_simple(static_cast<int>(shape.size()),
                                                            shape.data(), maximum.data()),
                           H5Sclose, what);
    return checked(H5Dcreate2(file, name.c_str(), file_type_of(type, string_type), space.get(),
                              H5P_DEFAULT, dcpl.get(), H5P_DEFAULT),
                   H5Dclose, what);
}

void write_whole(hid_t dataset, const Payload& payload, const std::string& what) {
    Handle string_type = utf8_string_type();
    check(H5Dwrite(dataset, memory_type_of(payload.type, string_type), H5S_ALL, H5S_ALL,
                   H5P_DEFAULT, payload.data),
          what);
}

// Makes the dataset `rows` + `start` long along `case` and writes `payload` into rows
// [start, start + rows).
void write_rows(hid_t dataset, const std::string& name, const std::vector<hsize_t>& trailing,
                std::size_t start, std::size_t rows, const Payload& payload,
                const std::string& where, hid_t transfer = H5P_DEFAULT) {
    const std::string what = "append to dataset " + in_quotes(name) + " in " + where;
    std::vector<hsize_t> extent{static_cast<hsize_t>(start + rows)};
    extent.insert(extent.end(), trailing.begin(), trailing.end());
    check(H5Dset_extent(dataset, extent.data()), what);
    Handle file_space = checked(H5Dget_space(dataset), H5Sclose, what);
    std::vector<hsize_t> offset(extent.size(), 0), count = extent;
    offset[0] = start;
    count[0] = rows;
    check(H5Sselect_hyperslab(file_space.get(), H5S_SELECT_SET, offset.data(), nullptr,
                              count.data(), nullptr),
          what);
    Handle memory_space = checked(
        H5Screate_simple(static_cast<int>(count.size()), count.data(), nullptr), H5Sclose, what);
    Handle string_type = utf8_string_type();
    Handle sized_transfer;
    if (payload.type == ValueType::string && transfer == H5P_DEFAULT) {
        // Strings go through HDF5's type conversion, whose buffers default to 1 MiB each and
        // are zeroed on every write (measured: a sixth of an append of 1024 rows). Buffers for
        // exactly these rows (16-byte references in memory and in the file) do the same work.
        sized_transfer = checked(H5Pcreate(H5P_DATASET_XFER), H5Pclose, what);
        const std::size_t bytes = std::max<std::size_t>(product(count), 1) * 16;
        check(H5Pset_buffer(sized_transfer.get(), bytes, nullptr, nullptr), what);
        transfer = sized_transfer.get();
    }
    check(H5Dwrite(dataset, memory_type_of(payload.type, string_type), memory_space.get(),
                   file_space.get(), transfer, payload.data),
          what);
}

// Reads rows [start, start + rows) of a numeric dataset as raw 8-byte words (float64 and
// int64 alike) through `transfer`; returns false if HDF5 fails (e.g. a checksum).
bool read_rows(hid_t dataset, ValueType type, const std::vector<hsize_t>& trailing,
               std::size_t start, std::size_t rows, std::vector<std::uint64_t>& out,
               hid_t transfer) {
    std::vector<hsize_t> offset(trailing.size() + 1, 0), count{static_cast<hsize_t>(rows)};
    count.insert(count.end(), trailing.begin(), trailing.end());
    offset[0] = start;
    out.assign(product(count), 0);
    if (out.empty())
        return true;
    const hid_t file_space = H5Dget_space(dataset);
    if (file_space < 0)
        return false;
    Handle file_handle(file_space, H5Sclose);
    if (H5Sselect_hyperslab(file_space, H5S_SELECT_SET, offset.data(), nullptr, count.data(),
                            nullptr) < 0)
        return false;
    const hid_t memory_space =
        H5Screate_simple(static_cast<int>(count.size()), count.data(), nullptr);
    if (memory_space < 0)
        return false;
    Handle memory_handle(memory_space, H5Sclose);
    return H5Dread(dataset, type == ValueType::float64 ? H5T_NATIVE_DOUBLE : H5T_NATIVE_INT64,
                   memory_space, file_space, transfer, out.data()) >= 0;
}

// A transfer list that skips checksum verification (to read a chunk whose checksum a kill
// left stale, after its rows were vouched for otherwise).
Handle unverified_transfer(const std::string& what) {
    Handle dxpl = checked(H5Pcreate(H5P_DATASET_XFER), H5Pclose, what);
    check(H5Pset_edc_check(dxpl.get(), H5Z_DISABLE_EDC), what);
    return dxpl;
}

// Running hash of 8-byte words (FNV-style multiply-xor: each step is a bijection of the state,
// so any single changed word changes the result).
constexpr std::uint64_t hash_seed = 0xcbf29ce484222325ULL;
inline std::uint64_t hash_word(std::uint64_t h, std::uint64_t word) {
    return (h ^ word) * 0x100000001b3ULL;
}

// ---------------------------------------------------------------- reading

// ---------------------------------------------------------------- variable-length strings

// A variable-length string is stored as a 16-byte reference (length, address of a global heap
// collection, object index) to an object in a global heap collection. HDF5 (1.10) follows such
// a reference without checking the collection, so one damaged byte there can crash the reader.
// check_string_heaps() reads the references of a dataset's elements and the collections they
// point to straight from the file, and refuses the dataset unless every reference names an
// object of exactly its length in a well-formed collection (the layout of HDF5's file-format
// specification, version 3.0, section III.E, "Global Heap").

std::uint64_t le_bytes(const unsigned char* p, int n) {
    std::uint64_t v = 0;
    for (int i = n - 1; i >= 0; --i)
        v = (v << 8) | p[i];
    return v;
}

struct HeapRef {
    std::uint64_t length;
    std::uint64_t collection;
    std::uint64_t index;
};

class RawFile {
  public:
    explicit RawFile(const std::string& path) : fd_(::open(path.c_str(), O_RDONLY)) {
        if (fd_ >= 0) {
            const off_t end = ::lseek(fd_, 0, SEEK_END);
            size_ = end < 0 ? 0 : static_cast<std::uint64_t>(end);
        }
    }
    ~RawFile() {
        if (fd_ >= 0)
            ::close(fd_);
    }
    RawFile(const RawFile&) = delete;
    RawFile& operator=(const RawFile&) = delete;
    bool ok() const { return fd_ >= 0; }
    std::uint64_t size() const { return size_; }
    // Reads [offset, offset + n) or returns false if the file is shorter.
    bool read(std::uint64_t offset, std::size_t n, std::vector<unsigned char>& out) const {
        if (offset > size_ || n > size_ - offset)
            return false;
        out.resize(n);
        std::size_t done = 0;
        while (done < n) {
            const ssize_t got =
                ::pread(fd_, out.data() + done, n - done, static_cast<off_t>(offset + done));
            if (got <= 0)
                return false;
            done += static_cast<std::size_t>(got);
        }
        return true;
    }

  private:
    int fd_ = -1;
    std::uint64_t size_ = 0;
};

// Collects the references of the elements of `raw` (a chunk at `origin` of extent `chunk`,
// or the whole dataset) that lie inside the dataset's `shape`.
void collect_refs(const std::vector<unsigned char>& raw, const std::vector<hsize_t>& origin,
                  const std::vector<hsize_t>& chunk, const std::vector<hsize_t>& shape,
                  std::vector<HeapRef>& refs) {
    const std::size_t count = product(chunk);
    std::vector<hsize_t> local(chunk.size(), 0);
    for (std::size_t e = 0; e < count; ++e) {
        bool inside = true;
        for (std::size_t d = 0; d < chunk.size(); ++d)
            inside = inside && origin[d] + local[d] < shape[d];
        if (inside && (e + 1) * 16 <= raw.size()) {
            const unsigned char* p = raw.data() + e * 16;
            refs.push_back({le_bytes(p, 4), le_bytes(p + 4, 8), le_bytes(p + 12, 4)});
        }
        for (std::size_t d = chunk.size(); d-- > 0;) { // next element, row-major
            if (++local[d] < chunk[d])
                break;
            local[d] = 0;
        }
    }
}

// Object index -> size of every object of the collection at `address`; empty if malformed.
std::map<std::uint64_t, std::uint64_t> heap_objects(const RawFile& raw, std::uint64_t address) {
    std::map<std::uint64_t, std::uint64_t> objects;
    std::vector<unsigned char> head;
    if (!raw.read(address, 16, head) || std::memcmp(head.data(), "GCOL", 4) != 0 || head[4] != 1)
        return {};
    const std::uint64_t size = le_bytes(head.data() + 8, 8);
    std::vector<unsigned char> heap;
    if (size < 4096 || !raw.read(address, static_cast<std::size_t>(size), heap))
        return {};
    std::uint64_t p = 16;
    while (p < size) {
        if (p + 16 > size)
            break; // the end of the collection is free space too short for a header
        const std::uint64_t index = le_bytes(heap.data() + p, 2);
        const std::uint64_t length = le_bytes(heap.data() + p + 8, 8);
        std::uint64_t need = 0;
        if (index == 0) { // free space, header included
            need = length;
            if (need < 16)
                return {};
        } else {
            if (length > size)
                return {};
            need = 16 + ((length + 7) / 8) * 8;
            if (!objects.emplace(index, length).second)
                return {}; // an index used twice
        }
        if (need > size - p)
            return {};
        p += need;
    }
    objects.emplace(0, 0); // marks a well-formed collection
    return objects;
}

void check_string_heaps(hid_t file, hid_t dataset, const std::vector<hsize_t>& shape,
                        const std::string& path, const std::string& name) {
    const std::string damaged = "dataset " + in_quotes(name) + " in " + in_quotes(path) +
                                " is damaged (its variable-length strings point outside "
                                "well-formed heap objects); it was not read";
    const std::string what = "check the strings of " + in_quotes(name) + " in " + in_quotes(path);
    if (product(shape) == 0)
        return;
    Handle fcpl = checked(H5Fget_create_plist(file), H5Pclose, what);
    std::size_t address_size = 0, length_size = 0;
    check(H5Pget_sizes(fcpl.get(), &address_size, &length_size), what);
    if (address_size != 8 || length_size != 8)
        throw FileError(what + ": only files with 8-byte addresses and lengths are supported");
    RawFile raw(path);
    if (!raw.ok())
        throw FileError("could not open " + in_quotes(path) + ": " + std::strerror(errno));
    Handle dcpl = checked(H5Dget_create_plist(dataset), H5Pclose, what);
    std::vector<HeapRef> refs;
    std::vector<unsigned char> bytes;
    const H5D_layout_t layout = H5Pget_layout(dcpl.get());
    if (layout == H5D_CONTIGUOUS) {
        const haddr_t offset = H5Dget_offset(dataset);
        if (offset == HADDR_UNDEF)
            return; // never written: every element is the empty fill value
        if (!raw.read(offset, product(shape) * 16, bytes))
            throw FileError(damaged);
        collect_refs(bytes, std::vector<hsize_t>(shape.size(), 0), shape, shape, refs);
    } else if (layout == H5D_CHUNKED) {
        std::vector<hsize_t> chunk(shape.size());
        if (H5Pget_chunk(dcpl.get(), static_cast<int>(chunk.size()), chunk.data()) !=
            static_cast<int>(chunk.size()))
            fail(what);
        hsize_t chunks = 0;
        Handle space = checked(H5Dget_space(dataset), H5Sclose, what);
        check(H5Dget_num_chunks(dataset, space.get(), &chunks), what);
        std::vector<hsize_t> origin(shape.size());
        for (hsize_t k = 0; k < chunks; ++k) {
            unsigned mask = 0;
            haddr_t address = HADDR_UNDEF;
            hsize_t size = 0;
            check(H5Dget_chunk_info(dataset, space.get(), k, origin.data(), &mask, &address, &size),
                  what);
            if (address == HADDR_UNDEF)
                continue;
            if (size < product(chunk) * 16 || !raw.read(address, product(chunk) * 16, bytes))
                throw FileError(damaged);
            collect_refs(bytes, origin, chunk, shape, refs);
        }
    } else {
        throw FileError(what + ": only contiguous and chunked datasets are supported");
    }
    std::map<std::uint64_t, std::map<std::uint64_t, std::uint64_t>> heaps;
    for (const HeapRef& ref : refs) {
        if (ref.collection == 0)
            continue; // a null reference, read as an empty string without a heap
        auto found = heaps.find(ref.collection);
        if (found == heaps.end())
            found = heaps.emplace(ref.collection, heap_objects(raw, ref.collection)).first;
        const auto& objects = found->second;
        const auto object = objects.find(ref.index);
        if (objects.empty() || ref.index == 0 || object == objects.end() ||
            object->second != ref.length)
            throw FileError(damaged);
    }
}

struct OpenRead {
    Handle file;
    Handle dataset;
    std::vector<hsize_t> shape;
    bool shared = false; // this process has the file open already (an appender)
};

// `shared` (if given) is set when a reader shares a file that this process has open already.
Handle open_file(const std::string& path, unsigned flags, bool* shared = nullptr) {
    if (path.empty())
        throw InputError("path is empty");
    std::error_code ec;
    if (!fs::is_regular_file(path, ec))
        throw InputError("file " + in_quotes(path) + " does not exist");
    if (flags != H5F_ACC_RDONLY && file_is_locked(path))
        throw FileError(locked_message(path));
    if (flags == H5F_ACC_RDONLY) {
        // Readers take no lock, unless this process has the file open already (an appender):
        // HDF5 then shares that open file, which needs the same locking setting.
        Handle unlocked = file_access(false);
        const hid_t file = H5Fopen(path.c_str(), flags, unlocked.get());
        if (file >= 0)
            return Handle(file, H5Fclose);
        if (shared != nullptr)
            *shared = true;
    }
    Handle fapl = file_access(true);
    return checked(H5Fopen(path.c_str(), flags, fapl.get()), H5Fclose, "open " + in_quotes(path));
}

bool link_exists(hid_t file, const std::string& name) {
    if (name.empty() || name.find('/') != std::string::npos)
        return false;
    return H5Lexists(file, name.c_str(), H5P_DEFAULT) > 0;
}

OpenRead open_dataset(const std::string& path, const std::string& name) {
    OpenRead r;
    r.file = open_file(path, H5F_ACC_RDONLY, &r.shared);
    if (!link_exists(r.file.get(), name))
        throw InputError("no dataset " + in_quotes(name) + " in " + in_quotes(path));
    const std::string what = "read dataset " + in_quotes(name) + " of " + in_quotes(path);
    r.dataset = checked(H5Dopen2(r.file.get(), name.c_str(), H5P_DEFAULT), H5Dclose, what);
    Handle space = checked(H5Dget_space(r.dataset.get()), H5Sclose, what);
    const int rank = H5Sget_simple_extent_ndims(space.get());
    if (rank < 0)
        fail(what);
    r.shape.resize(static_cast<std::size_t>(rank));
    if (rank > 0)
        check(H5Sget_simple_extent_dims(space.get(), r.shape.data(), nullptr), what);
    return r;
}

H5T_class_t class_of(hid_t dataset, const std::string& what) {
    Handle type = checked(H5Dget_type(dataset), H5Tclose, what);
    const H5T_class_t c = H5Tget_class(type.get());
    if (c == H5T_NO_CLASS)
        fail(what);
    return c;
}

void store_shape(const std::vector<hsize_t>& shape, std::vector<std::size_t>* out) {
    if (out != nullptr)
        out->assign(shape.begin(), shape.end());
}

template <class T>
std::vector<T> read_numbers(const std::string& path, const std::string& name, H5T_class_t want,
                            hid_t memory_type, std::vector<std::size_t>* shape) {
    QuietHdf5 quiet;
    const std::string what = "read dataset " + in_quotes(name) + " of " + in_quotes(path);
    // A chunk that fails its checksum while another process holds the file (a sweep appending
    // to it) may be the block being written: it is read again, from a fresh open, a few times.
    for (int attempt = 0;; ++attempt) {
        OpenRead r = open_dataset(path, name);
        if (class_of(r.dataset.get(), what) != want)
            throw InputError("dataset " + in_quotes(name) + " in " + in_quotes(path) + " is not " +
                             (want == H5T_FLOAT ? "floating point" : "integer"));
        std::vector<T> values(product(r.shape));
        if (values.empty() || H5Dread(r.dataset.get(), memory_type, H5S_ALL, H5S_ALL, H5P_DEFAULT,
                                      values.data()) >= 0) {
            store_shape(r.shape, shape);
            return values;
        }
        const std::string detail = hdf5_detail();
        if (detail.find("Fletcher32") == std::string::npos)
            throw FileError("HDF5 could not " + what + ": " + detail);
        if (r.shared || !file_is_locked(path))
            throw FileError(in_quotes(path) + " is damaged: dataset " + in_quotes(name) +
                            " fails its Fletcher32 checksum; it was not read");
        if (attempt == 4)
            throw FileError("dataset " + in_quotes(name) + " in " + in_quotes(path) +
                            " failed its Fletcher32 checksum while another process is writing "
                            "the file (a block being written); read again");
    }
}

// Reads `count` strings of `type` (variable- or fixed-length) through `read`.
template <class Read>
std::vector<std::string> read_text(hid_t file_type, std::size_t count, Read read,
                                   const std::string& what) {
    std::vector<std::string> out(count);
    const htri_t variable = H5Tis_variable_str(file_type);
    check(variable, what);
    if (variable > 0) {
        Handle memory = utf8_string_type();
        std::vector<char*> pointers(count, nullptr);
        check(read(memory.get(), static_cast<void*>(pointers.data())), what);
        for (std::size_t i = 0; i < count; ++i) {
            if (pointers[i] != nullptr) {
                out[i] = pointers[i];
                H5free_memory(pointers[i]);
            }
        }
    } else {
        const std::size_t size = H5Tget_size(file_type);
        if (size == 0)
            fail(what);
        Handle memory = checked(H5Tcopy(file_type), H5Tclose, what);
        std::vector<char> buffer(size * count);
        check(read(memory.get(), static_cast<void*>(buffer.data())), what);
        for (std::size_t i = 0; i < count; ++i) {
            const char* begin = buffer.data() + i * size;
            std::size_t length = 0;
            while (length < size && begin[length] != '\0')
                ++length;
            while (length > 0 && begin[length - 1] == ' ') // space-padded strings
                --length;
            out[i].assign(begin, length);
        }
    }
    return out;
}

// The object owning an attribute ("/" for the file) and whether it has attribute `name`.
std::string attribute_owner(hid_t file, const std::string& path, const std::string& object,
                            const std::string& name, bool* exists) {
    const std::string owner = object.empty() || object == "/" ? std::string("/") : object;
    if (owner != "/" && !link_exists(file, owner))
        throw InputError("no dataset " + in_quotes(owner) + " in " + in_quotes(path));
    const htri_t found = H5Aexists_by_name(file, owner.c_str(), name.c_str(), H5P_DEFAULT);
    check(found, "look up attribute " + in_quotes(name) + " in " + in_quotes(path));
    *exists = found > 0;
    return owner;
}

Handle open_attribute(hid_t file, const std::string& path, const std::string& object,
                      const std::string& name) {
    bool exists = false;
    const std::string owner = attribute_owner(file, path, object, name, &exists);
    if (!exists)
        throw InputError("no attribute " + in_quotes(name) + " on " + in_quotes(owner) + " in " +
                         in_quotes(path));
    return checked(H5Aopen_by_name(file, owner.c_str(), name.c_str(), H5P_DEFAULT, H5P_DEFAULT),
                   H5Aclose, "open attribute " + in_quotes(name) + " in " + in_quotes(path));
}

std::int64_t read_int_attribute_of(hid_t file, const std::string& path, const std::string& object,
                                   const std::string& name) {
    Handle attribute = open_attribute(file, path, object, name);
    const std::string what = "read attribute " + in_quotes(name) + " of " + in_quotes(path);
    Handle type = checked(H5Aget_type(attribute.get()), H5Tclose, what);
    if (H5Tget_class(type.get()) != H5T_INTEGER)
        throw InputError("attribute " + in_quotes(name) + " in " + in_quotes(path) +
                         " is not an integer");
    Handle space = checked(H5Aget_space(attribute.get()), H5Sclose, what);
    if (H5Sget_simple_extent_npoints(space.get()) != 1)
        throw InputError("attribute " + in_quotes(name) + " in " + in_quotes(path) +
                         " is not a single value");
    std::int64_t value = 0;
    check(H5Aread(attribute.get(), H5T_NATIVE_INT64, &value), what);
    return value;
}

herr_t keep_scale_name(hid_t, unsigned, hid_t scale, void* out) {
    char buffer[1024];
    const ssize_t n = H5Iget_name(scale, buffer, sizeof buffer);
    if (n < 0)
        return -1;
    std::string name(buffer, static_cast<std::size_t>(std::min<ssize_t>(n, sizeof buffer - 1)));
    const std::size_t slash = name.rfind('/');
    *static_cast<std::string*>(out) = slash == std::string::npos ? name : name.substr(slash + 1);
    return 1; // the first attached scale names the dimension
}

} // namespace

// ================================================================ ResultWriter

struct ResultWriter::Impl {
    std::string target;
    std::string temporary;
    Handle file;
    std::map<std::string, hsize_t> dims; // coordinate name -> length (case: appendable)
    std::set<std::string> datasets;
    bool has_case = false;
    bool committed = false;

    std::string where() const { return in_quotes(temporary) + " (for " + in_quotes(target) + ")"; }

    void require_open() const {
        if (committed || !file.valid())
            throw InputError("the result file " + in_quotes(target) +
                             " was already committed or discarded; nothing can be added");
    }

    void require_new(const std::string& what, const std::string& name) const {
        check_object_name(what, name);
        if (datasets.count(name) != 0)
            throw InputError(what + " " + in_quotes(name) + " already exists in " +
                             in_quotes(target));
    }

    std::string known_dims() const {
        std::string list;
        for (const auto& d : dims)
            list += (list.empty() ? "" : ", ") + d.first;
        return list.empty() ? std::string("none") : list;
    }

    std::vector<hsize_t> shape_of(const std::string& name, const std::vector<std::string>& names,
                                  bool allow_case) const {
        std::vector<hsize_t> shape;
        std::set<std::string> seen;
        for (const std::string& d : names) {
            const auto found = dims.find(d);
            if (found == dims.end())
                throw InputError("variable " + in_quotes(name) + ": unknown dimension " +
                                 in_quotes(d) + " (known: " + known_dims() + ")");
            if (d == case_dim && !allow_case)
                throw InputError("variable " + in_quotes(name) +
                                 ": dimension 'case' is appendable; declare the variable with "
                                 "add_case_variable");
            if (!seen.insert(d).second)
                throw InputError("variable " + in_quotes(name) + ": dimension " + in_quotes(d) +
                                 " is repeated");
            shape.push_back(found->second);
        }
        return shape;
    }

    void add(const std::string& name, const std::vector<std::string>& dim_names,
             const std::vector<hsize_t>& shape, const Payload& payload, const std::string& units,
             const std::string& long_name, bool scale) {
        QuietHdf5 quiet;
        Handle dataset = create_dataset(file.get(), name, payload.type, shape, false, where());
        if (product(shape) > 0)
            write_whole(dataset.get(), payload,
                        "write dataset " + in_quotes(name) + " in " + where());
        if (scale)
            check(H5DSset_scale(dataset.get(), name.c_str()),
                  "make " + in_quotes(name) + " a dimension scale in " + where());
        else
            attach(dataset.get(), name, dim_names);
        describe(dataset.get(), name, units, long_name);
        datasets.insert(name);
        if (scale)
            dims[name] = shape[0];
    }

    void attach(hid_t dataset, const std::string& name, const std::vector<std::string>& dim_names) {
        for (std::size_t i = 0; i < dim_names.size(); ++i) {
            const std::string what = "attach dimension " + in_quotes(dim_names[i]) + " to " +
                                     in_quotes(name) + " in " + where();
            Handle scale =
                checked(H5Dopen2(file.get(), dim_names[i].c_str(), H5P_DEFAULT), H5Dclose, what);
            check(H5DSattach_scale(dataset, scale.get(), static_cast<unsigned>(i)), what);
        }
    }

    void ensure_case(bool labelled = false) {
        if (has_case)
            return;
        for (const char* name : {case_dim, labelled ? row_variable : case_dim})
            if (datasets.count(name) != 0)
                throw InputError("a dataset named " + in_quotes(name) + " already exists in " +
                                 in_quotes(target) +
                                 "; that name is reserved for the appendable dimension");
        QuietHdf5 quiet;
        Handle dataset =
            create_dataset(file.get(), case_dim, labelled ? ValueType::string : ValueType::int64,
                           {0}, true, where());
        check(H5DSset_scale(dataset.get(), case_dim),
              "make 'case' a dimension scale in " + where());
        describe(dataset.get(), case_dim, "1", labelled ? case_label : "case number");
        write_int_attribute(file.get(), completed_attr, 0, where());
        datasets.insert(case_dim);
        dims[case_dim] = 0;
        has_case = true;
        if (labelled) {
            Handle rows =
                create_dataset(file.get(), row_variable, ValueType::int64, {0}, true, where());
            attach(rows.get(), row_variable, {case_dim});
            describe(rows.get(), row_variable, "1", "row number");
            datasets.insert(row_variable);
        }
    }

    // Check that attribute `name` may be set on `dataset` ("" or "/": the file), then
    // write(object, where) on it.
    template <class Write>
    void set_attribute_on(const std::string& dataset, const std::string& name, Write write) {
        check_object_name("attribute", name);
        const bool root = dataset.empty() || dataset == "/";
        static const std::set<std::string> reserved = {"CLASS", "NAME", "REFERENCE_LIST",
                                                       "DIMENSION_LIST"};
        if (reserved.count(name) != 0 ||
            (root && (name == completed_attr || name == tail_check_attr)))
            throw InputError("attribute name " + in_quotes(name) +
                             " is reserved for the file layout");
        if (!root && datasets.count(dataset) == 0)
            throw InputError("cannot set attribute " + in_quotes(name) + ": no dataset " +
                             in_quotes(dataset) + " in " + in_quotes(target));
        QuietHdf5 quiet;
        if (root) {
            write(file.get(), where());
            return;
        }
        Handle object = checked(H5Dopen2(file.get(), dataset.c_str(), H5P_DEFAULT), H5Dclose,
                                "open dataset " + in_quotes(dataset) + " in " + where());
        write(object.get(), "dataset " + in_quotes(dataset));
    }

    std::string case_label; // long name of text case labels (label_cases)
};

ResultWriter::ResultWriter(const std::string& path, const std::string& config_json)
    : impl_(std::make_unique<Impl>()) {
    check_target(path);
    check_text("config", config_json);
    impl_->target = path;
    impl_->temporary = temporary_beside(path);
    QuietHdf5 quiet;
    Handle fapl = file_access();
    impl_->file =
        checked(H5Fcreate(impl_->temporary.c_str(), H5F_ACC_EXCL, H5P_DEFAULT, fapl.get()),
                H5Fclose, "create " + impl_->where());
    try {
        write_string_attribute(impl_->file.get(), "exosieve_version", EXOSIEVE_VERSION,
                               impl_->where());
        write_string_attribute(impl_->file.get(), "config", config_json, impl_->where());
        write_string_attribute(impl_->file.get(), "created", utc_now(), impl_->where());
    } catch (...) {
        impl_->file.reset();
        std::remove(impl_->temporary.c_str());
        throw;
    }
}

ResultWriter::~ResultWriter() {
    if (impl_ && !impl_->committed) {
        QuietHdf5 quiet;
        impl_->file.reset();
        std::remove(impl_->temporary.c_str());
    }
}

ResultWriter::ResultWriter(ResultWriter&&) noexcept = default;
ResultWriter& ResultWriter::operator=(ResultWriter&& other) noexcept {
    if (this != &other) {
        ResultWriter discard(std::move(*this)); // removes our temporary if uncommitted
        impl_ = std::move(other.impl_);
    }
    return *this;
}

ResultWriter::Impl& ResultWriter::live() const {
    if (!impl_)
        throw InputError("this ResultWriter was moved from");
    impl_->require_open();
    return *impl_;
}

void ResultWriter::add_coordinate(const std::string& name, const double* values, std::size_t count,
                                  const std::string& units, const std::string& long_name) {
    Impl& w = live();
    w.require_new("coordinate", name);
    check_description(name, units, long_name);
    if (count == 0)
        throw InputError("coordinate " + in_quotes(name) + " is empty");
    w.add(name, {name}, {count}, Payload::of(values), units, long_name, true);
}

void ResultWriter::add_coordinate(const std::string& name, const std::int64_t* values,
                                  std::size_t count, const std::string& units,
                                  const std::string& long_name) {
    Impl& w = live();
    w.require_new("coordinate", name);
    check_description(name, units, long_name);
    if (count == 0)
        throw InputError("coordinate " + in_quotes(name) + " is empty");
    w.add(name, {name}, {count}, Payload::of(values), units, long_name, true);
}

void ResultWriter::add_coordinate(const std::string& name, const std::vector<std::string>& values,
                                  const std::string& long_name) {
    Impl& w = live();
    w.require_new("coordinate", name);
    check_description(name, "1", long_name);
    check_strings(name, values);
    if (values.empty())
        throw InputError("coordinate " + in_quotes(name) + " is empty");
    w.add(name, {name}, {values.size()}, Payload::of(values), "1", long_name, true);
}

namespace {
void check_count(const std::string& name, const std::vector<std::string>& dims,
                 const std::vector<hsize_t>& shape, std::size_t count) {
    if (count != product(shape))
        throw InputError("variable " + in_quotes(name) + ": data has " + std::to_string(count) +
                         " values but dimensions " + shape_text(dims, shape) + " need " +
                         std::to_string(product(shape)));
}
} // namespace

void ResultWriter::add_variable(const std::string& name, const std::vector<std::string>& dims,
                                const double* data, std::size_t count, const std::string& units,
                                const std::string& long_name) {
    Impl& w = live();
    w.require_new("variable", name);
    const std::vector<hsize_t> shape = w.shape_of(name, dims, false);
    check_count(name, dims, shape, count);
    check_description(name, units, long_name);
    w.add(name, dims, shape, Payload::of(data), units, long_name, false);
}

void ResultWriter::add_variable(const std::string& name, const std::vector<std::string>& dims,
                                const std::int64_t* data, std::size_t count,
                                const std::string& units, const std::string& long_name) {
    Impl& w = live();
    w.require_new("variable", name);
    const std::vector<hsize_t> shape = w.shape_of(name, dims, false);
    check_count(name, dims, shape, count);
    check_description(name, units, long_name);
    w.add(name, dims, shape, Payload::of(data), units, long_name, false);
}

void ResultWriter::add_variable(const std::string& name, const std::vector<std::string>& dims,
                                const std::vector<std::string>& data, const std::string& units,
                                const std::string& long_name) {
    Impl& w = live();
    w.require_new("variable", name);
    const std::vector<hsize_t> shape = w.shape_of(name, dims, false);
    check_count(name, dims, shape, data.size());
    check_description(name, units, long_name);
    check_strings(name, data);
    w.add(name, dims, shape, Payload::of(data), units, long_name, false);
}

void ResultWriter::add_case_variable(const std::string& name, ValueType type,
                                     const std::vector<std::string>& trailing_dims,
                                     const std::string& units, const std::string& long_name) {
    Impl& w = live();
    if (name == case_dim)
        throw InputError("'case' is the appendable coordinate itself; it is created "
                         "automatically");
    w.require_new("variable", name);
    std::vector<hsize_t> shape{0};
    const std::vector<hsize_t> trailing = w.shape_of(name, trailing_dims, false);
    shape.insert(shape.end(), trailing.begin(), trailing.end());
    check_description(name, units, long_name);
    w.ensure_case();
    QuietHdf5 quiet;
    Handle dataset = create_dataset(w.file.get(), name, type, shape, true, w.where());
    std::vector<std::string> dim_names{case_dim};
    dim_names.insert(dim_names.end(), trailing_dims.begin(), trailing_dims.end());
    w.attach(dataset.get(), name, dim_names);
    describe(dataset.get(), name, units, long_name);
    w.datasets.insert(name);
}

void ResultWriter::label_cases(const std::string& long_name) {
    Impl& w = live();
    if (w.has_case)
        throw InputError("label_cases must come before the first case variable of " +
                         in_quotes(w.target));
    check_description("case", "1", long_name);
    w.case_label = long_name;
    w.ensure_case(true);
}

void ResultWriter::set_attribute(const std::string& name, const std::string& value) {
    set_attribute("/", name, value);
}

void ResultWriter::set_attribute(const std::string& dataset, const std::string& name,
                                 const std::vector<std::int64_t>& values) {
    if (values.empty())
        throw InputError("attribute " + in_quotes(name) + " needs at least one value");
    live().set_attribute_on(dataset, name, [&](hid_t object, const std::string& where) {
        write_int_array_attribute(object, name, values, where);
    });
}

void ResultWriter::set_attribute(const std::string& dataset, const std::string& name,
                                 const std::string& value) {
    Impl& w = live();
    check_object_name("attribute", name);
    check_text("attribute " + in_quotes(name), value);
    w.set_attribute_on(dataset, name, [&](hid_t object, const std::string& where) {
        write_string_attribute(object, name, value, where);
    });
}

void ResultWriter::commit() {
    Impl& w = live();
    QuietHdf5 quiet;
    check(w.file.close(), "close " + w.where());
    sync_path(w.temporary, false);
    try {
        check_replaceable(w.target); // the target may have appeared since the start
    } catch (...) {
        std::remove(w.temporary.c_str());
        w.committed = true; // nothing left to undo
        throw;
    }
    if (std::rename(w.temporary.c_str(), w.target.c_str()) != 0)
        throw FileError("could not rename " + in_quotes(w.temporary) + " to " +
                        in_quotes(w.target) + ": " + std::strerror(errno));
    w.committed = true;
    sync_path(directory_of(w.target), true);
}

void ResultWriter::discard() {
    Impl& w = live();
    QuietHdf5 quiet;
    w.file.reset();
    std::remove(w.temporary.c_str());
    w.committed = true; // nothing left to do or undo
}

std::vector<std::size_t> ResultWriter::shape_of(const std::string& variable,
                                                const std::vector<std::string>& dims) const {
    const std::vector<hsize_t> shape = live().shape_of(variable, dims, false);
    return {shape.begin(), shape.end()};
}

bool ResultWriter::is_open() const {
    return impl_ && !impl_->committed && impl_->file.valid();
}

const std::string& ResultWriter::path() const {
    if (!impl_)
        throw InputError("this ResultWriter was moved from");
    return impl_->target;
}

// ================================================================ RowBlock

RowBlock::RowBlock(std::size_t rows) : rows_(rows) {}

std::size_t RowBlock::Column::count() const {
    switch (type) {
    case ValueType::float64:
        return f.size();
    case ValueType::int64:
        return i.size();
    case ValueType::string:
        return s.size();
    }
    return 0;
}

void RowBlock::reset(std::size_t rows) {
    rows_ = rows;
    for (auto& entry : columns_) {
        entry.second.f.clear();
        entry.second.i.clear();
        entry.second.s.clear();
    }
}

void RowBlock::set(const std::string& name, const double* data, std::size_t count) {
    Column& column = columns_[name];
    column.type = ValueType::float64;
    column.f.assign(data, data + count);
    column.i.clear();
    column.s.clear();
}

void RowBlock::set(const std::string& name, const std::int64_t* data, std::size_t count) {
    Column& column = columns_[name];
    column.type = ValueType::int64;
    column.i.assign(data, data + count);
    column.f.clear();
    column.s.clear();
}

void RowBlock::set(const std::string& name, const std::string* data, std::size_t count) {
    check_strings(name, data, count);
    Column& column = columns_[name];
    column.type = ValueType::string;
    column.s.assign(data, data + count);
    column.f.clear();
    column.i.clear();
}

void RowBlock::set(const std::string& name, std::vector<double> data) {
    Column column;
    column.type = ValueType::float64;
    column.f = std::move(data);
    columns_[name] = std::move(column);
}

void RowBlock::set(const std::string& name, std::vector<std::int64_t> data) {
    Column column;
    column.type = ValueType::int64;
    column.i = std::move(data);
    columns_[name] = std::move(column);
}

void RowBlock::set(const std::string& name, std::vector<std::string> data) {
    check_strings(name, data);
    Column column;
    column.type = ValueType::string;
    column.s = std::move(data);
    columns_[name] = std::move(column);
}

// ================================================================ ResultAppender

struct ResultAppender::Impl {
    struct Variable {
        ValueType type;
        std::vector<hsize_t> trailing;
        std::size_t row_size;
        // Open from the first append to close(): reopening a dataset for every block would
        // drop its chunk cache, and the last, partly filled chunk would be read back each time.
        Handle dataset;
        // Numbers: rows per HDF5 chunk along `case`, and the committed rows of the last, partly
        // filled chunk (the one the next append rewrites) with the running hash of their words.
        std::size_t chunk_rows = 1;
        std::size_t tail_rows = 0;
        std::uint64_t tail_hash = hash_seed;
    };
    std::string path;
    Handle file;
    int fd = -1;
    std::size_t completed = 0;
    std::size_t discarded = 0;
    bool repaired = false; // the end of allocation was moved on reopening
    std::map<std::string, Variable> variables;
    // The case variable the appender numbers when a block does not set it: `case` itself, or
    // `row` where `case` holds text labels.
    std::string numbered = case_dim;

    void durable_flush() {
        check(H5Fflush(file.get(), H5F_SCOPE_GLOBAL), "flush " + in_quotes(path));
        if (::fsync(fd) != 0)
            throw FileError("could not fsync " + in_quotes(path) + ": " + std::strerror(errno));
    }

    const Variable& variable(const std::string& name) const {
        const auto found = variables.find(name);
        if (found == variables.end())
            throw InputError("no case variable " + in_quotes(name) + " in " + in_quotes(path));
        return found->second;
    }

    void open(const std::string& file_path) {
        path = file_path;
        QuietHdf5 quiet;
        file = open_file(path, H5F_ACC_RDWR);
        repair_end_of_allocation();
        const htri_t has = H5Aexists(file.get(), completed_attr);
        check(has, "read " + in_quotes(path));
        if (has == 0 || !link_exists(file.get(), case_dim))
            throw InputError(in_quotes(path) + " is not an appendable result file (it lacks the "
                                               "'completed' attribute or the 'case' coordinate)");
        const std::int64_t done = read_int_attribute_of(file.get(), path, "/", completed_attr);
        if (done < 0)
            throw FileError(in_quotes(path) + " is damaged: 'completed' is " +
                            std::to_string(done));
        completed = static_cast<std::size_t>(done);
        find_variables();
        check_tails();
        cut_back();
        void* handle = nullptr;
        Handle fapl =
            checked(H5Fget_access_plist(file.get()), H5Pclose, "inspect " + in_quotes(path));
        check(H5Fget_vfd_handle(file.get(), fapl.get(), &handle),
              "get the file descriptor of " + in_quotes(path));
        fd = *static_cast<int*>(handle);
        if (discarded > 0 || repaired)
            durable_flush();
    }

    // A kill during a flush can leave metadata on disk that lies past the end of allocation
    // recorded in the superblock (e.g. a global heap of strings that grew at the end of the
    // file, written before the superblock). HDF5 then refuses to read it ("len exceeds EOA")
    // and would cut it off at close. A cleanly closed file ends exactly at its end of
    // allocation, so a longer file is such a case: move the end of allocation to the end of
    // the file, which keeps every byte that was written.
    void repair_end_of_allocation() {
        haddr_t eoa = 0;
        check(H5Fget_eoa(file.get(), &eoa), "read the end of allocation of " + in_quotes(path));
        std::error_code ec;
        const std::uintmax_t eof = fs::file_size(path, ec);
        if (!ec && eof > eoa) {
            check(H5Fincrement_filesize(file.get(), 0),
                  "extend the end of allocation of " + in_quotes(path));
            repaired = true;
        }
    }

    void find_variables() {
        const std::string what = "list the datasets of " + in_quotes(path);
        H5G_info_t info;
        check(H5Gget_info(file.get(), &info), what);
        for (hsize_t k = 0; k < info.nlinks; ++k) {
            char name[1024];
            const ssize_t n = H5Lget_name_by_idx(file.get(), "/", H5_INDEX_NAME, H5_ITER_INC, k,
                                                 name, sizeof name, H5P_DEFAULT);
            if (n < 0)
                fail(what);
            Handle object = checked(H5Oopen(file.get(), name, H5P_DEFAULT), H5Oclose, what);
            if (H5Iget_type(object.get()) != H5I_DATASET)
                continue;
            Handle space = checked(H5Dget_space(object.get()), H5Sclose, what);
            const int rank = H5Sget_simple_extent_ndims(space.get());
            if (rank < 1)
                continue;
            std::vector<hsize_t> shape(static_cast<std::size_t>(rank)), maximum(shape.size());
            check(H5Sget_simple_extent_dims(space.get(), shape.data(), maximum.data()), what);
            if (maximum[0] != H5S_UNLIMITED)
                continue;
            Handle type = checked(H5Dget_type(object.get()), H5Tclose, what);
            Variable v;
            switch (H5Tget_class(type.get())) {
            case H5T_FLOAT:
                v.type = ValueType::float64;
                break;
            case H5T_INTEGER:
                v.type = ValueType::int64;
                break;
            case H5T_STRING:
                if (H5Tis_variable_str(type.get()) <= 0)
                    throw InputError("case variable " + in_quotes(name) + " in " + in_quotes(path) +
                                     " holds fixed-length strings; only variable-length "
                                     "strings can be appended");
                v.type = ValueType::string;
                break;
            default:
                throw InputError("case variable " + in_quotes(name) + " in " + in_quotes(path) +
                                 " has an unsupported element type");
            }
            v.trailing.assign(shape.begin() + 1, shape.end());
            v.row_size = product(v.trailing);
            variables[name] = std::move(v);
            if (shape[0] < completed)
                throw FileError(in_quotes(path) + " is damaged: case variable " + in_quotes(name) +
                                " has " + std::to_string(shape[0]) + " rows but 'completed' is " +
                                std::to_string(completed));
            discarded = std::max<std::size_t>(discarded, shape[0] - completed);
        }
        const bool labelled =
            variables.count(case_dim) != 0 && variables[case_dim].type == ValueType::string &&
            variables.count(row_variable) != 0 && variables[row_variable].type == ValueType::int64;
        if (!labelled &&
            (variables.count(case_dim) == 0 || variables[case_dim].type != ValueType::int64))
            throw InputError(in_quotes(path) + " is not an appendable result file ('case' is not "
                                               "an appendable int64 coordinate, nor text labels "
                                               "beside an int64 'row')");
        numbered = labelled ? row_variable : case_dim;
    }

    // The hash that `completed_check` records beside `completed`: every numeric case
    // variable's committed rows in its last, partly filled chunk.
    // With `next`, the tails it gives replace the current ones.
    using Tails = std::map<std::string, std::pair<std::size_t, std::uint64_t>>;
    std::uint64_t combined_hash(const Tails* next = nullptr) const {
        std::uint64_t h = hash_seed;
        for (const auto& [name, v] : variables) {
            if (v.type == ValueType::string)
                continue;
            std::pair<std::size_t, std::uint64_t> tail{v.tail_rows, v.tail_hash};
            if (next != nullptr && next->count(name) != 0)
                tail = next->at(name);
            h = hash_word(hash_word(h, tail.second), tail.first);
        }
        return h;
    }

    // Each append rewrites the last, partly filled chunk of every numeric case variable, which
    // holds committed rows too; a kill during that write can leave the chunk failing its
    // Fletcher32 checksum although its committed rows are the bytes they were (only the rows
    // of the interrupted block differ). Such a chunk is read without verification, and
    // rewritten with a fresh checksum only if its committed rows match the hash recorded with
    // `completed`; otherwise the file is refused as damaged, naming the dataset.
    void check_tails() {
        std::vector<std::string> stale;
        std::map<std::string, std::vector<std::uint64_t>> unverified;
        for (auto& [name, v] : variables) {
            if (v.type == ValueType::string)
                continue;
            const std::string what =
                "read the last chunk of " + in_quotes(name) + " in " + in_quotes(path);
            Handle dataset =
                checked(H5Dopen2(file.get(), name.c_str(), H5P_DEFAULT), H5Dclose, what);
            Handle dcpl = checked(H5Dget_create_plist(dataset.get()), H5Pclose, what);
            const int rank = static_cast<int>(v.trailing.size() + 1);
            std::vector<hsize_t> chunk(static_cast<std::size_t>(rank));
            if (H5Pget_chunk(dcpl.get(), rank, chunk.data()) != rank || chunk[0] == 0)
                fail(what);
            v.chunk_rows = static_cast<std::size_t>(chunk[0]);
            const std::size_t start = completed - completed % v.chunk_rows;
            v.tail_rows = completed - start;
            std::vector<std::uint64_t> words;
            if (!read_rows(dataset.get(), v.type, v.trailing, start, v.tail_rows, words,
                           H5P_DEFAULT)) {
                Handle dxpl = unverified_transfer(what);
                if (!read_rows(dataset.get(), v.type, v.trailing, start, v.tail_rows, words,
                               dxpl.get()))
                    fail(what);
                stale.push_back(name);
            }
            v.tail_hash = hash_seed;
            for (const std::uint64_t w : words)
                v.tail_hash = hash_word(v.tail_hash, w);
            if (!stale.empty() && stale.back() == name)
                unverified[name] = std::move(words);
        }
        if (stale.empty())
            return;
        std::array<std::int64_t, 2> vouched{-1, 0};
        if (H5Aexists(file.get(), tail_check_attr) > 0) {
            Handle attribute =
                checked(H5Aopen(file.get(), tail_check_attr, H5P_DEFAULT), H5Aclose,
                        "read attribute " + in_quotes(tail_check_attr) + " of " + in_quotes(path));
            Handle space = checked(H5Aget_space(attribute.get()), H5Sclose, "read " + path);
            if (H5Sget_simple_extent_npoints(space.get()) != 2 ||
                H5Aread(attribute.get(), H5T_NATIVE_INT64, vouched.data()) < 0)
                vouched = {-1, 0};
        }
        if (vouched[0] != static_cast<std::int64_t>(completed) ||
            static_cast<std::uint64_t>(vouched[1]) != combined_hash())
            throw FileError(in_quotes(path) + " is damaged: dataset " + in_quotes(stale.front()) +
                            " fails its Fletcher32 checksum; it was not used");
        for (const std::string& name : stale) {
            const Variable& v = variables[name];
            const std::string what =
                "rewrite the last chunk of " + in_quotes(name) + " in " + in_quotes(path);
            Handle dataset =
                checked(H5Dopen2(file.get(), name.c_str(), H5P_DEFAULT), H5Dclose, what);
            Handle dxpl = unverified_transfer(what);
            const std::vector<std::uint64_t>& words = unverified[name];
            std::vector<hsize_t> offset(v.trailing.size() + 1, 0),
                count{static_cast<hsize_t>(v.tail_rows)};
            count.insert(count.end(), v.trailing.begin(), v.trailing.end());
            offset[0] = completed - v.tail_rows;
            Handle file_space = checked(H5Dget_space(dataset.get()), H5Sclose, what);
            check(H5Sselect_hyperslab(file_space.get(), H5S_SELECT_SET, offset.data(), nullptr,
                                      count.data(), nullptr),
                  what);
            Handle memory_space =
                checked(H5Screate_simple(static_cast<int>(count.size()), count.data(), nullptr),
                        H5Sclose, what);
            check(H5Dwrite(dataset.get(),
                           v.type == ValueType::float64 ? H5T_NATIVE_DOUBLE : H5T_NATIVE_INT64,
                           memory_space.get(), file_space.get(), dxpl.get(), words.data()),
                  what);
            check(dataset.close(), what); // writes the chunk with a fresh checksum
        }
        repaired = true;
    }

    // Recovery rule: rows past `completed` belong to an interrupted block; drop them.
    void cut_back() {
        if (discarded == 0)
            return;
        for (const auto& [name, v] : variables) {
            const std::string what =
                "cut back dataset " + in_quotes(name) + " in " + in_quotes(path);
            Handle dataset =
                checked(H5Dopen2(file.get(), name.c_str(), H5P_DEFAULT), H5Dclose, what);
            std::vector<hsize_t> extent{static_cast<hsize_t>(completed)};
            extent.insert(extent.end(), v.trailing.begin(), v.trailing.end());
            check(H5Dset_extent(dataset.get(), extent.data()), what);
        }
    }
};

ResultAppender::ResultAppender(ResultWriter&& schema) : impl_(std::make_unique<Impl>()) {
    ResultWriter writer(std::move(schema));
    ResultWriter::Impl& w = writer.live();
    if (!w.has_case)
        throw InputError("the result file " + in_quotes(w.target) +
                         " declares no case variable; nothing could be appended");
    writer.commit();
    impl_->open(writer.path());
}

ResultAppender::ResultAppender(const std::string& path) : impl_(std::make_unique<Impl>()) {
    impl_->open(path);
}

ResultAppender::~ResultAppender() {
    if (impl_) {
        QuietHdf5 quiet;
        for (auto& entry : impl_->variables)
            entry.second.dataset.reset();
        impl_->file.reset();
    }
}

ResultAppender::ResultAppender(ResultAppender&&) noexcept = default;
ResultAppender& ResultAppender::operator=(ResultAppender&&) noexcept = default;

ResultAppender::Impl& ResultAppender::any() const {
    if (!impl_)
        throw InputError("this ResultAppender was moved from");
    return *impl_;
}

ResultAppender::Impl& ResultAppender::live() const {
    Impl& a = any();
    if (!a.file.valid())
        throw InputError("the result file " + in_quotes(a.path) + " was closed");
    return a;
}

void ResultAppender::append(const RowBlock& block) {
    Impl& a = live();
    const std::size_t rows = block.rows();
    // Check the whole block before anything is written.
    for (const auto& [name, column] : block.columns_) {
        const auto found = a.variables.find(name);
        if (found == a.variables.end())
            throw InputError("row block: " + in_quotes(name) + " is not a case variable of " +
                             in_quotes(a.path));
        const Impl::Variable& v = found->second;
        if (column.type != v.type)
            throw InputError("row block: " + in_quotes(name) + " holds " + type_name(column.type) +
                             " values, the file stores " + type_name(v.type));
        if (column.count() != rows * v.row_size)
            throw InputError("row block: " + in_quotes(name) + " has " +
                             std::to_string(column.count()) + " values, " + std::to_string(rows) +
                             " rows of " + std::to_string(v.row_size) + " need " +
                             std::to_string(rows * v.row_size));
    }
    for (const auto& entry : a.variables)
        if (entry.first != a.numbered && block.columns_.count(entry.first) == 0)
            throw InputError("row block lacks case variable " + in_quotes(entry.first) +
                             (entry.first == case_dim ? " (the case labels)" : ""));
    if (rows == 0)
        return;

    std::vector<std::int64_t> numbers;
    if (block.columns_.count(a.numbered) == 0) {
        numbers.resize(rows);
        for (std::size_t i = 0; i < rows; ++i)
            numbers[i] = static_cast<std::int64_t>(a.completed + i);
    }
    QuietHdf5 quiet;
    for (auto& [name, v] : a.variables) {
        const auto column = block.columns_.find(name);
        Payload payload = Payload::of(numbers.data());
        if (column != block.columns_.end()) {
            const RowBlock::Column& c = column->second;
            payload = c.type == ValueType::float64 ? Payload::of(c.f.data())
                      : c.type == ValueType::int64 ? Payload::of(c.i.data())
                                                   : Payload::of(c.s);
        }
        if (!v.dataset.valid())
            v.dataset =
                checked(H5Dopen2(a.file.get(), name.c_str(), H5P_DEFAULT), H5Dclose,
                        "append to dataset " + in_quotes(name) + " in " + in_quotes(a.path));
        write_rows(v.dataset.get(), name, v.trailing, a.completed, rows, payload,
                   in_quotes(a.path));
    }
    // The committed rows of each last, partly filled chunk once this block is in.
    Impl::Tails tails;
    for (const auto& [name, v] : a.variables) {
        if (v.type == ValueType::string)
            continue;
        const auto column = block.columns_.find(name);
        const void* data = column == block.columns_.end() ? static_cast<const void*>(numbers.data())
                           : v.type == ValueType::float64
                               ? static_cast<const void*>(column->second.f.data())
                               : static_cast<const void*>(column->second.i.data());
        // Only the rows after the last chunk boundary the block reaches end up in the tail.
        const std::size_t end = a.completed + rows;
        const std::size_t boundary = end - end % v.chunk_rows;
        std::size_t first = 0, tail_rows = v.tail_rows;
        std::uint64_t hash = v.tail_hash;
        if (boundary > a.completed) {
            first = boundary - a.completed;
            tail_rows = 0;
            hash = hash_seed;
        }
        const unsigned char* bytes = static_cast<const unsigned char*>(data);
        for (std::size_t k = first * v.row_size; k < rows * v.row_size; ++k) {
            std::uint64_t word = 0;
            std::memcpy(&word, bytes + 8 * k, 8);
            hash = hash_word(hash, word);
        }
        tails[name] = {tail_rows + (rows - first), hash};
    }
    a.durable_flush(); // the rows are on disk ...
    const std::uint64_t vouch = a.combined_hash(&tails);
    write_int_attribute(a.file.get(), completed_attr, static_cast<std::int64_t>(a.completed + rows),
                        in_quotes(a.path));
    write_int_pair_attribute(
        a.file.get(), tail_check_attr,
        {static_cast<std::int64_t>(a.completed + rows), static_cast<std::int64_t>(vouch)},
        in_quotes(a.path));
    a.durable_flush(); // ... before the counter that vouches for them
    a.completed += rows;
    for (const auto& [name, tail] : tails) {
        a.variables[name].tail_rows = tail.first;
        a.variables[name].tail_hash = tail.second;
    }
}

std::size_t ResultAppender::completed() const {
    return any().completed;
}

std::size_t ResultAppender::discarded_rows() const {
    return any().discarded;
}

bool ResultAppender::repaired() const {
    return any().repaired;
}

std::vector<std::size_t> ResultAppender::row_shape(const std::string& name) const {
    const auto& t = any().variable(name).trailing;
    return {t.begin(), t.end()};
}

ValueType ResultAppender::type_of(const std::string& name) const {
    return any().variable(name).type;
}

std::vector<std::string> ResultAppender::case_variables() const {
    std::vector<std::string> names;
    for (const auto& entry : any().variables)
        names.push_back(entry.first);
    return names;
}

void ResultAppender::close() {
    if (!impl_ || !impl_->file.valid())
        return;
    QuietHdf5 quiet;
    for (auto& entry : impl_->variables)
        check(entry.second.dataset.close(), "close " + in_quotes(impl_->path));
    check(impl_->file.close(), "close " + in_quotes(impl_->path));
    impl_->fd = -1;
}

const std::string& ResultAppender::path() const {
    return any().path;
}

// ================================================================ readers

std::vector<double> read_doubles(const std::string& path, const std::string& dataset,
                                 std::vector<std::size_t>* shape) {
    return read_numbers<double>(path, dataset, H5T_FLOAT, H5T_NATIVE_DOUBLE, shape);
}

std::vector<std::int64_t> read_int64s(const std::string& path, const std::string& dataset,
                                      std::vector<std::size_t>* shape) {
    return read_numbers<std::int64_t>(path, dataset, H5T_INTEGER, H5T_NATIVE_INT64, shape);
}

std::vector<std::string> read_strings(const std::string& path, const std::string& dataset,
                                      std::vector<std::size_t>* shape) {
    QuietHdf5 quiet;
    OpenRead r = open_dataset(path, dataset);
    const std::string what = "read dataset " + in_quotes(dataset) + " of " + in_quotes(path);
    Handle type = checked(H5Dget_type(r.dataset.get()), H5Tclose, what);
    if (H5Tget_class(type.get()) != H5T_STRING)
        throw InputError("dataset " + in_quotes(dataset) + " in " + in_quotes(path) +
                         " does not hold strings");
    const hid_t d = r.dataset.get();
    const htri_t variable = H5Tis_variable_str(type.get());
    check(variable, what);
    if (variable > 0)
        check_string_heaps(r.file.get(), d, r.shape, path, dataset);
    std::vector<std::string> values = read_text(
        type.get(), product(r.shape),
        [d](hid_t memory, void* buffer) {
            return H5Dread(d, memory, H5S_ALL, H5S_ALL, H5P_DEFAULT, buffer);
        },
        what);
    store_shape(r.shape, shape);
    return values;
}

std::string read_attribute(const std::string& path, const std::string& object,
                           const std::string& name) {
    QuietHdf5 quiet;
    Handle file = open_file(path, H5F_ACC_RDONLY);
    Handle attribute = open_attribute(file.get(), path, object, name);
    const std::string what = "read attribute " + in_quotes(name) + " of " + in_quotes(path);
    Handle type = checked(H5Aget_type(attribute.get()), H5Tclose, what);
    if (H5Tget_class(type.get()) != H5T_STRING)
        throw InputError("attribute " + in_quotes(name) + " in " + in_quotes(path) +
                         " is not a string");
    Handle space = checked(H5Aget_space(attribute.get()), H5Sclose, what);
    if (H5Sget_simple_extent_npoints(space.get()) != 1)
        throw InputError("attribute " + in_quotes(name) + " in " + in_quotes(path) +
                         " is not a single string");
    const hid_t a = attribute.get();
    return read_text(
        type.get(), 1, [a](hid_t memory, void* buffer) { return H5Aread(a, memory, buffer); },
        what)[0];
}

std::int64_t read_int_attribute(const std::string& path, const std::string& object,
                                const std::string& name) {
    QuietHdf5 quiet;
    Handle file = open_file(path, H5F_ACC_RDONLY);
    return read_int_attribute_of(file.get(), path, object, name);
}

bool has_dataset(const std::string& path, const std::string& dataset) {
    QuietHdf5 quiet;
    const Handle file = open_file(path, H5F_ACC_RDONLY);
    if (!link_exists(file.get(), dataset))
        return false;
    H5O_info_t info;
    check(H5Oget_info_by_name(file.get(), dataset.c_str(), &info, H5P_DEFAULT),
          "look up " + in_quotes(dataset) + " in " + in_quotes(path));
    return info.type == H5O_TYPE_DATASET;
}

bool has_attribute(const std::string& path, const std::string& object, const std::string& name) {
    QuietHdf5 quiet;
    const Handle file = open_file(path, H5F_ACC_RDONLY);
    bool exists = false;
    attribute_owner(file.get(), path, object, name, &exists);
    return exists;
}

std::vector<std::string> read_dimensions(const std::string& path, const std::string& dataset) {
    QuietHdf5 quiet;
    OpenRead r = open_dataset(path, dataset);
    const std::string what =
        "read the dimensions of " + in_quotes(dataset) + " in " + in_quotes(path);
    std::vector<std::string> names(r.shape.size());
    const htri_t is_scale = H5DSis_scale(r.dataset.get());
    check(is_scale, what);
    if (is_scale > 0) { // a coordinate is its own dimension
        std::fill(names.begin(), names.end(), dataset);
        return names;
    }
    for (std::size_t i = 0; i < names.size(); ++i) {
        const int count = H5DSget_num_scales(r.dataset.get(), static_cast<unsigned>(i));
        if (count < 0)
            fail(what);
        if (count == 0)
            continue;
        if (H5DSiterate_scales(r.dataset.get(), static_cast<unsigned>(i), nullptr, keep_scale_name,
                               &names[i]) < 0)
            fail(what);
    }
    return names;
}

} // namespace exosieve
