#include <doctest/doctest.h>

#include <hdf5.h>

#include <chrono>
#include <cmath>
#include <csignal>
#include <cstdint>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <fstream>
#include <limits>
#include <random>
#include <string>
#include <vector>

#include <sys/wait.h>
#include <unistd.h>

#include "exosieve/background_appender.hpp"
#include "exosieve/errors.hpp"
#include "exosieve/hdf5_io.hpp"
#include "temp_dir.hpp"

using namespace exosieve;
namespace fs = std::filesystem;

namespace {

double from_bits(std::uint64_t bits) {
    double d;
    std::memcpy(&d, &bits, sizeof d);
    return d;
}

bool same_bits(const std::vector<double>& a, const std::vector<double>& b) {
    return a.size() == b.size() && std::memcmp(a.data(), b.data(), a.size() * sizeof(double)) == 0;
}

template <class F> std::string message_of(F f) {
    try {
        f();
    } catch (const std::exception& e) {
        return e.what();
    }
    return "<no exception>";
}

bool contains(const std::string& text, const std::string& part) {
    return text.find(part) != std::string::npos;
}

// A small file: species x time with one variable of each element type.
void write_small(const std::string& path, double scale) {
    ResultWriter w(path, R"({"model": "small", "scale": )" + std::to_string(scale) + "}");
    w.add_coordinate("species", std::vector<std::string>{"H", "He"}, "species name");
    w.add_coordinate("time", std::vector<double>{0.0, 1e15}, "s", "time since start");
    w.add_variable("flux", {"species", "time"}, std::vector<double>{scale, 2 * scale, 3, 4},
                   "m-2 s-1", "Jeans flux");
    w.commit();
}

const std::vector<std::string> species_names{"H", "He", "O", "Ar-36"};
// A wide variable: 16 KiB rows make 4-row chunks, so appends keep growing the chunk index.
const std::size_t levels = 2048;

// Schema for the appending tests: per case a flux per species, a regime code and a label.
ResultWriter append_schema(const std::string& path) {
    ResultWriter w(path, R"({"sweep": "append test"})");
    w.add_coordinate("species", species_names, "species name");
    w.add_case_variable("flux", ValueType::float64, {"species"}, "m-2 s-1", "Jeans flux");
    w.add_case_variable("regime", ValueType::int64, {}, "1", "escape regime code");
    w.add_case_variable("label", ValueType::string, {}, "1", "case label");
    std::vector<double> level(levels);
    for (std::size_t j = 0; j < levels; ++j)
        level[j] = static_cast<double>(j);
    w.add_coordinate("level", level, "1", "level number");
    w.add_case_variable("profile", ValueType::float64, {"level"}, "m-3", "density profile");
    return w;
}

// Row `row` of the appending tests holds values that are a function of the row number.
RowBlock rows_from(std::size_t first, std::size_t count) {
    RowBlock block(count);
    std::vector<double> flux;
    std::vector<std::int64_t> regime;
    std::vector<std::string> label;
    std::vector<double> profile;
    for (std::size_t r = first; r < first + count; ++r) {
        for (std::size_t s = 0; s < species_names.size(); ++s)
            flux.push_back(1e10 * static_cast<double>(r) + static_cast<double>(s) / 3.0);
        for (std::size_t j = 0; j < levels; ++j)
            profile.push_back(4096.0 * static_cast<double>(r) + static_cast<double>(j));
        regime.push_back(static_cast<std::int64_t>(r % 4));
        label.push_back("case-" + std::to_string(r));
    }
    block.set("flux", flux);
    block.set("regime", regime);
    block.set("label", label);
    block.set("profile", std::move(profile));
    return block;
}

// rows_from()'s rows written into `block` through reset() and the setters that reuse storage.
void refill(RowBlock& block, std::size_t first, std::size_t count) {
    block.reset(count);
    std::vector<double> flux, profile;
    std::vector<std::int64_t> regime;
    std::vector<std::string> label;
    for (std::size_t r = first; r < first + count; ++r) {
        for (std::size_t s = 0; s < species_names.size(); ++s)
            flux.push_back(1e10 * static_cast<double>(r) + static_cast<double>(s) / 3.0);
        for (std::size_t j = 0; j < levels; ++j)
            profile.push_back(4096.0 * static_cast<double>(r) + static_cast<double>(j));
        regime.push_back(static_cast<std::int64_t>(r % 4));
        label.push_back("case-" + std::to_string(r));
    }
    block.set("flux", flux.data(), flux.size());
    block.set("regime", regime.data(), regime.size());
    block.set("label", label.data(), label.size());
    block.set("profile", profile.data(), profile.size());
}

// Throws unless rows [0, n) of the appending tests hold exactly what rows_from() wrote.
void check_rows(const std::string& path, std::size_t n) {
    std::vector<std::size_t> shape;
    const std::vector<double> flux = read_doubles(path, "flux", &shape);
    REQUIRE(shape == std::vector<std::size_t>{n, species_names.size()});
    const std::vector<std::int64_t> regime = read_int64s(path, "regime");
    const std::vector<std::string> label = read_strings(path, "label");
    const std::vector<std::int64_t> cases = read_int64s(path, "case");
    const std::vector<double> profile = read_doubles(path, "profile");
    REQUIRE(profile.size() == n * levels);
    REQUIRE(regime.size() == n);
    REQUIRE(label.size() == n);
    REQUIRE(cases.size() == n);
    std::size_t bad = 0;
    for (std::size_t r = 0; r < n; ++r) {
        for (std::size_t s = 0; s < species_names.size(); ++s)
            bad += flux[r * species_names.size() + s] !=
                   1e10 * static_cast<double>(r) + static_cast<double>(s) / 3.0;
        bad += regime[r] != static_cast<std::int64_t>(r % 4);
        bad += label[r] != "case-" + std::to_string(r);
        bad += cases[r] != static_cast<std::int64_t>(r);
        for (std::size_t j = 0; j < levels; ++j)
            bad +=
                profile[r * levels + j] != 4096.0 * static_cast<double>(r) + static_cast<double>(j);
    }
    CHECK(bad == 0);
}

} // namespace

TEST_CASE("hdf5_io: float64, int64 and UTF-8 strings come back bit for bit") {
    TempDir dir;
    const std::string path = dir.file("exact.h5");
    const std::vector<double> radius{6.371e6,
                                     -0.0,
                                     5e-324,
                                     std::numeric_limits<double>::max(),
                                     from_bits(0x7ff8000000000123ULL),
                                     std::numeric_limits<double>::infinity(),
                                     1.0 / 3.0};
    const std::vector<std::int64_t> sample{std::numeric_limits<std::int64_t>::min(), -1, 0,
                                           std::numeric_limits<std::int64_t>::max()};
    const std::vector<std::string> species{"H", "He", "Ar-36", "H\xE2\x82\x82O (\xC3\xA9t\xC3\xA9)",
                                           ""};
    std::vector<double> field(radius.size() * sample.size());
    std::vector<std::int64_t> codes(sample.size() * species.size());
    std::vector<std::string> notes(species.size());
    for (std::size_t i = 0; i < field.size(); ++i)
        field[i] = std::ldexp(1.0 + static_cast<double>(i) / 7.0, static_cast<int>(i) * 37 - 500);
    for (std::size_t i = 0; i < codes.size(); ++i)
        codes[i] = static_cast<std::int64_t>(i * i) - 7;
    for (std::size_t i = 0; i < notes.size(); ++i)
        notes[i] = std::string(i * 300, 'x') + "\xCE\xBB";
    const std::string config = R"({"planet": {"mass": 5.97e24}, "note": "caf\u00e9 \u03bb"})";
    {
        ResultWriter w(path, config);
        w.add_coordinate("radius", radius, "m", "exobase radius");
        w.add_coordinate("sample", sample, "1", "sample number");
        w.add_coordinate("species", species, "species name");
        w.add_variable("field", {"radius", "sample"}, field, "m-3", "number density");
        w.add_variable("code", {"sample", "species"}, codes, "1", "regime code");
        w.add_variable("note", {"species"}, notes, "1", "free text");
        w.add_variable("total", {}, std::vector<double>{42.5}, "kg", "total mass lost");
        w.set_attribute("title", "round trip");
        w.set_attribute("field", "comment", "invented values");
        w.commit();
    }
    std::vector<std::size_t> shape;
    CHECK(same_bits(read_doubles(path, "radius", &shape), radius));
    CHECK(shape == std::vector<std::size_t>{radius.size()});
    CHECK(same_bits(read_doubles(path, "field", &shape), field));
    CHECK(shape == std::vector<std::size_t>{radius.size(), sample.size()});
    CHECK(read_int64s(path, "sample") == sample);
    CHECK(read_int64s(path, "code", &shape) == codes);
    CHECK(shape == std::vector<std::size_t>{sample.size(), species.size()});
    CHECK(read_strings(path, "species") == species);
    CHECK(read_strings(path, "note") == notes);
    CHECK(read_doubles(path, "total", &shape) == std::vector<double>{42.5});
    CHECK(shape.empty());

    // Layout: units and long_name everywhere; the global attributes.
    for (const char* name : {"radius", "sample", "species", "field", "code", "note", "total"}) {
        CAPTURE(name);
        CHECK_FALSE(read_attribute(path, name, "units").empty());
        CHECK_FALSE(read_attribute(path, name, "long_name").empty());
    }
    CHECK(read_attribute(path, "radius", "units") == "m");
    CHECK(read_attribute(path, "species", "units") == "1");
    CHECK(read_attribute(path, "field", "long_name") == "number density");
    CHECK(read_attribute(path, "field", "comment") == "invented values");
    CHECK(read_attribute(path, "/", "exosieve_version") == EXOSIEVE_VERSION);
    CHECK(read_attribute(path, "", "config") == config);
    CHECK(read_attribute(path, "/", "title") == "round trip");
    const std::string created = read_attribute(path, "/", "created");
    REQUIRE(created.size() == 20);
    std::tm tm{};
    REQUIRE(strptime(created.c_str(), "%Y-%m-%dT%H:%M:%SZ", &tm) != nullptr);
    const double age = std::difftime(std::time(nullptr), timegm(&tm));
    CHECK(age >= 0.0);
    CHECK(age < 120.0);
}

TEST_CASE("hdf5_io: coordinates are dimension scales attached to the variables") {
    TempDir dir;
    const std::string path = dir.file("dims.h5");
    write_small(path, 1.0);
    CHECK(read_dimensions(path, "flux") == std::vector<std::string>{"species", "time"});
    CHECK(read_dimensions(path, "species") == std::vector<std::string>{"species"});
    CHECK(read_dimensions(path, "time") == std::vector<std::string>{"time"});
    CHECK(read_attribute(path, "time", "CLASS") == "DIMENSION_SCALE");
    CHECK(read_attribute(path, "time", "NAME") == "time");
    CHECK(read_attribute(path, "time", "units") == "s");
}

TEST_CASE("hdf5_io: an abandoned writer leaves the good file in place and no temporary") {
    TempDir dir;
    const std::string path = dir.file("result.h5");
    write_small(path, 1.0);
    const std::vector<double> good = read_doubles(path, "flux");
    {
        ResultWriter w(path, "{}");
        w.add_coordinate("species", std::vector<std::string>{"H", "He"}, "species name");
        CHECK(dir.entries().size() == 2); // the target and the temporary beside it
        // While the new file is being written the old one is still whole.
        CHECK(read_doubles(path, "flux") == good);
        // A failure part-way (bad input here) abandons the writer.
        CHECK_THROWS_AS(
            w.add_variable("flux", {"species"}, std::vector<double>{1.0}, "m-2 s-1", "Jeans flux"),
            InputError);
    }
    CHECK(read_doubles(path, "flux") == good);
    CHECK(read_attribute(path, "/", "config") == R"({"model": "small", "scale": 1.000000})");
    CHECK(dir.entries() == std::vector<std::string>{"result.h5"});

    // discard() gives up explicitly.
    {
        ResultWriter w(path, "{}");
        w.add_coordinate("time", std::vector<double>{1.0, 2.0}, "s", "time");
        CHECK(w.shape_of("x", {"time"}) == std::vector<std::size_t>{2});
        CHECK_THROWS_AS(w.shape_of("x", {"tim"}), InputError);
        CHECK(w.is_open());
        w.discard();
        CHECK_FALSE(w.is_open());
        CHECK_THROWS_AS(w.commit(), InputError);
        CHECK(dir.entries() == std::vector<std::string>{"result.h5"});
    }
    CHECK(read_doubles(path, "flux") == good);

    // commit() replaces it.
    write_small(path, 7.0);
    CHECK(read_doubles(path, "flux")[0] == 7.0);
    CHECK(dir.entries() == std::vector<std::string>{"result.h5"});
}

TEST_CASE("hdf5_io: bad arguments are refused with the name and the numbers") {
    TempDir dir;
    const std::string path = dir.file("bad.h5");
    ResultWriter w(path, "{}");
    w.add_coordinate("species", std::vector<std::string>{"H", "He", "O"}, "species name");
    w.add_coordinate("time", std::vector<double>{0.0, 1.0}, "s", "time");
    const std::vector<double> five(5, 1.0);

    std::string m = message_of([&] { w.add_variable("n", {"specis"}, five, "m-3", "density"); });
    CHECK(contains(m, "'n'"));
    CHECK(contains(m, "unknown dimension 'specis'"));
    CHECK(contains(m, "species, time"));
    CHECK_THROWS_AS(w.add_variable("n", {"specis"}, five, "m-3", "density"), InputError);

    m = message_of([&] { w.add_variable("n", {"species", "time"}, five, "m-3", "density"); });
    CHECK(contains(m, "data has 5 values"));
    CHECK(contains(m, "(species=3, time=2) need 6"));

    CHECK_THROWS_AS(w.add_coordinate("time", std::vector<double>{1.0}, "s", "again"), InputError);
    m = message_of([&] { w.add_coordinate("age", std::vector<double>{1.0}, "seconds", "age"); });
    CHECK(contains(m, "'seconds'"));
    CHECK(contains(m, "\"s\""));
    CHECK_THROWS_AS(
        w.add_coordinate("t2", std::vector<double>{1.0}, "days since 2000-01-01", "date"),
        InputError);
    CHECK_THROWS_AS(w.add_coordinate("e", std::vector<double>{}, "m", "empty"), InputError);
    CHECK_THROWS_AS(w.add_variable("x", {"time"}, std::vector<double>{1, 2}, "", "x"), InputError);
    CHECK_THROWS_AS(w.add_variable("x", {"time"}, std::vector<double>{1, 2}, "m", ""), InputError);
    CHECK_THROWS_AS(w.add_variable("a/b", {"time"}, std::vector<double>{1, 2}, "m", "x"),
                    InputError);
    CHECK_THROWS_AS(w.add_variable("x", {"time", "time"}, std::vector<double>(4), "m", "x"),
                    InputError);
    CHECK_THROWS_AS(w.set_attribute("nothing", "units", "m"), InputError);
    CHECK_THROWS_AS(w.set_attribute("time", "CLASS", "x"), InputError);
    CHECK_THROWS_AS(w.add_variable("s", {"time"},
                                   std::vector<std::string>{"a", std::string(1, '\0')}, "1",
                                   "text"),
                    InputError);
    w.commit();
    CHECK_THROWS_AS(w.set_attribute("late", "x"), InputError);
    CHECK_THROWS_AS(w.commit(), InputError);

    // Targets and readers.
    CHECK_THROWS_AS(ResultWriter(dir.file("no/such/dir.h5"), "{}"), InputError);
    CHECK_THROWS_AS(ResultWriter(dir.path.string(), "{}"), InputError);
    CHECK_THROWS_AS(read_doubles(dir.file("missing.h5"), "x"), InputError);
    m = message_of([&] { read_doubles(path, "nothing"); });
    CHECK(contains(m, "no dataset 'nothing'"));
    CHECK(contains(m, path));
    CHECK_THROWS_AS(read_doubles(path, "species"), InputError);
    CHECK_THROWS_AS(read_int64s(path, "time"), InputError);
    CHECK_THROWS_AS(read_attribute(path, "time", "absent"), InputError);
    CHECK_THROWS_AS(read_int_attribute(path, "/", "config"), InputError);

    // An HDF5 failure is an FileError that names the file.
    const std::string not_hdf5 = dir.file("plain.txt");
    std::ofstream(not_hdf5) << "not an HDF5 file\n";
    m = message_of([&] { read_doubles(not_hdf5, "x"); });
    CHECK(contains(m, not_hdf5));
    CHECK_THROWS_AS(read_doubles(not_hdf5, "x"), FileError);
    CHECK_THROWS_AS(ResultAppender{not_hdf5}, FileError);
    CHECK_THROWS_AS(ResultAppender{path}, InputError); // HDF5, but not appendable
}

TEST_CASE("hdf5_io: append blocks, reopen, continue") {
    TempDir dir;
    const std::string path = dir.file("sweep.h5");
    {
        ResultAppender a(append_schema(path));
        CHECK(a.completed() == 0);
        CHECK(a.discarded_rows() == 0);
        CHECK(a.case_variables() ==
              std::vector<std::string>{"case", "flux", "label", "profile", "regime"});
        CHECK(a.row_shape("flux") == std::vector<std::size_t>{species_names.size()});
        CHECK(a.type_of("label") == ValueType::string);
        a.append(rows_from(0, 5));
        a.append(rows_from(5, 1));
        a.append(rows_from(6, 0)); // nothing to do
        CHECK(a.completed() == 6);
        CHECK(read_int_attribute(path, "/", "completed") == 6);
        a.close();
        CHECK_THROWS_AS(a.append(rows_from(6, 1)), InputError);
    }
    check_rows(path, 6);
    CHECK(read_dimensions(path, "flux") == std::vector<std::string>{"case", "species"});
    CHECK(read_dimensions(path, "regime") == std::vector<std::string>{"case"});
    CHECK(read_attribute(path, "flux", "units") == "m-2 s-1");
    CHECK(read_attribute(path, "case", "long_name") == "case number");
    CHECK(read_attribute(path, "/", "config") == R"({"sweep": "append test"})");
    {
        ResultAppender a(path);
        CHECK(a.completed() == 6);
        CHECK(a.discarded_rows() == 0);
        CHECK_FALSE(a.repaired());
        a.append(rows_from(6, 300)); // spans several chunks
    }
    check_rows(path, 306);
    CHECK(read_int_attribute(path, "", "completed") == 306);

    // Explicit case identifiers replace the row numbers.
    {
        ResultAppender a(path);
        RowBlock block = rows_from(306, 2);
        block.set("case", std::vector<std::int64_t>{1000, 1001});
        a.append(block);
    }
    const std::vector<std::int64_t> cases = read_int64s(path, "case");
    CHECK(cases.size() == 308);
    CHECK(cases[305] == 305);
    CHECK(cases[306] == 1000);
    CHECK(cases[307] == 1001);
}

TEST_CASE("hdf5_io: text case labels, row numbers beside them, and int64 attributes") {
    TempDir dir;
    const std::string path = dir.file("labelled.h5");
    {
        ResultWriter w(path, R"({"sweep": "labels"})");
        w.label_cases("planet name");
        w.add_coordinate("species", species_names, "species name");
        w.add_case_variable("regime", ValueType::int64, {}, "1", "escape regime code");
        CHECK_THROWS_WITH_AS(w.label_cases("too late"), doctest::Contains("before the first"),
                             InputError);
        CHECK_THROWS_AS(w.add_case_variable("row", ValueType::int64, {}, "1", "x"), InputError);
        w.set_attribute("regime", "flag_values", std::vector<std::int64_t>{0, 1, 2, 3});
        w.set_attribute("regime", "flag_meanings", "a b c d");
        CHECK_THROWS_AS(w.set_attribute("regime", "flag_values", std::vector<std::int64_t>{}),
                        InputError);
        ResultAppender a(std::move(w));
        CHECK(a.case_variables() == std::vector<std::string>{"case", "regime", "row"});
        RowBlock block(3);
        block.set("regime", std::vector<std::int64_t>{2, 0, 3});
        std::string m = message_of([&] { a.append(block); });
        CHECK(contains(m, "lacks case variable 'case' (the case labels)"));
        block.set("case", std::vector<std::string>{"Vesk b", "Ondra", "Vesk b"});
        a.append(block); // row is numbered as an unlabelled case would be
    }
    {
        ResultAppender a(path); // reopened: still labelled
        RowBlock block(1);
        block.set("regime", std::vector<std::int64_t>{1});
        block.set("case", std::vector<std::string>{"Tarn"});
        a.append(block);
    }
    CHECK(read_strings(path, "case") ==
          std::vector<std::string>{"Vesk b", "Ondra", "Vesk b", "Tarn"});
    CHECK(read_int64s(path, "row") == std::vector<std::int64_t>{0, 1, 2, 3});
    CHECK(read_int64s(path, "regime") == std::vector<std::int64_t>{2, 0, 3, 1});
    CHECK(read_dimensions(path, "row") == std::vector<std::string>{"case"});
    CHECK(read_dimensions(path, "regime") == std::vector<std::string>{"case"});
    CHECK(read_attribute(path, "case", "long_name") == "planet name");
    CHECK(read_attribute(path, "regime", "flag_meanings") == "a b c d");
}

TEST_CASE("hdf5_io: a malformed row block is refused before anything is written") {
    TempDir dir;
    const std::string path = dir.file("sweep.h5");
    ResultAppender a(append_schema(path));
    a.append(rows_from(0, 2));

    RowBlock short_flux = rows_from(2, 3);
    short_flux.set("flux", std::vector<double>(11, 1.0));
    std::string m = message_of([&] { a.append(short_flux); });
    CHECK(contains(m, "'flux' has 11 values, 3 rows of 4 need 12"));

    RowBlock missing(1);
    missing.set("flux", std::vector<double>(4, 1.0));
    missing.set("regime", std::vector<std::int64_t>{1});
    m = message_of([&] { a.append(missing); });
    CHECK(contains(m, "lacks case variable 'label'"));

    RowBlock wrong_type = rows_from(2, 1);
    wrong_type.set("regime", std::vector<double>{1.0});
    m = message_of([&] { a.append(wrong_type); });
    CHECK(contains(m, "'regime' holds float64 values, the file stores int64"));

    RowBlock unknown = rows_from(2, 1);
    unknown.set("pressure", std::vector<double>{1.0});
    CHECK_THROWS_AS(a.append(unknown), InputError);
    CHECK(a.completed() == 2);
    a.close();
    check_rows(path, 2);

    // Schemas that cannot append.
    ResultWriter plain(dir.file("plain.h5"), "{}");
    plain.add_coordinate("time", std::vector<double>{0.0}, "s", "time");
    CHECK_THROWS_AS(ResultAppender(std::move(plain)), InputError);
    ResultWriter w(dir.file("w.h5"), "{}");
    CHECK_THROWS_AS(w.add_case_variable("case", ValueType::int64, {}, "1", "x"), InputError);
    CHECK_THROWS_AS(w.add_case_variable("x", ValueType::float64, {"nope"}, "1", "x"), InputError);
    w.add_case_variable("x", ValueType::float64, {}, "1", "x");
    CHECK_THROWS_AS(w.add_variable("y", {"case"}, std::vector<double>{}, "1", "y"), InputError);
}

TEST_CASE("hdf5_io: reopening cuts off a torn block, which is then written again") {
    TempDir dir;
    const std::string path = dir.file("sweep.h5");
    {
        ResultAppender a(append_schema(path));
        a.append(rows_from(0, 10));
    }
    // The state a kill leaves between writing a block's rows and raising `completed`: the
    // case variables are longer and hold (part of) the new rows, the counter is unchanged.
    {
        hid_t file = H5Fopen(path.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
        REQUIRE(file >= 0);
        for (const char* name : {"case", "flux", "regime", "label", "profile"}) {
            hid_t dataset = H5Dopen2(file, name, H5P_DEFAULT);
            REQUIRE(dataset >= 0);
            hsize_t extent[2] = {17,
                                 std::string(name) == "profile" ? levels : species_names.size()};
            CHECK(H5Dset_extent(dataset, extent) >= 0);
            H5Dclose(dataset);
        }
        hid_t dataset = H5Dopen2(file, "flux", H5P_DEFAULT);
        hid_t space = H5Dget_space(dataset);
        hsize_t start[2] = {10, 0}, count[2] = {7, species_names.size()};
        CHECK(H5Sselect_hyperslab(space, H5S_SELECT_SET, start, nullptr, count, nullptr) >= 0);
        hid_t memory = H5Screate_simple(2, count, nullptr);
        std::vector<double> junk(7 * species_names.size(), -1.0);
        CHECK(H5Dwrite(dataset, H5T_NATIVE_DOUBLE, memory, space, H5P_DEFAULT, junk.data()) >= 0);
        H5Sclose(memory);
        H5Sclose(space);
        H5Dclose(dataset);
        H5Fclose(file);
    }
    std::vector<std::size_t> shape;
    const std::vector<double> torn = read_doubles(path, "flux", &shape);
    CHECK(shape[0] == 17);
    CHECK(torn.back() == -1.0);
    CHECK(read_int_attribute(path, "/", "completed") == 10);
    {
        ResultAppender a(path);
        CHECK(a.completed() == 10);
        CHECK(a.discarded_rows() == 7);
        a.close();
        read_doubles(path, "flux", &shape);
        CHECK(shape[0] == 10);
        check_rows(path, 10);
    }
    {
        ResultAppender a(path);
        CHECK(a.discarded_rows() == 0);
        a.append(rows_from(10, 4));
    }
    check_rows(path, 14);
}

TEST_CASE("hdf5_io: unwritten rows of a float64 case variable read as NaN") {
    TempDir dir;
    const std::string path = dir.file("sweep.h5");
    {
        ResultAppender a(append_schema(path));
        a.append(rows_from(0, 1));
    }
    hid_t file = H5Fopen(path.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
    REQUIRE(file >= 0);
    hid_t dataset = H5Dopen2(file, "flux", H5P_DEFAULT);
    hsize_t extent[2] = {3, species_names.size()};
    CHECK(H5Dset_extent(dataset, extent) >= 0);
    H5Dclose(dataset);
    H5Fclose(file);
    const std::vector<double> flux = read_doubles(path, "flux");
    REQUIRE(flux.size() == 3 * species_names.size());
    CHECK(flux[0] == 0.0);
    CHECK(std::isnan(flux[species_names.size()]));
    CHECK(std::isnan(flux.back()));
}

namespace {

// File offset and stored size (data and checksum) of chunk `index` of `name`.
std::pair<std::uint64_t, std::uint64_t> chunk_at(const std::string& path, const char* name,
                                                 hsize_t index) {
    hid_t file = H5Fopen(path.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
    REQUIRE(file >= 0);
    hid_t dataset = H5Dopen2(file, name, H5P_DEFAULT);
    REQUIRE(dataset >= 0);
    hid_t space = H5Dget_space(dataset);
    hsize_t origin[2] = {0, 0}, size = 0;
    unsigned mask = 0;
    haddr_t address = HADDR_UNDEF;
    CHECK(H5Dget_chunk_info(dataset, space, index, origin, &mask, &address, &size) >= 0);
    H5Sclose(space);
    H5Dclose(dataset);
    H5Fclose(file);
    return {address, size};
}

std::string file_bytes(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    return std::string(std::istreambuf_iterator<char>(in), {});
}

void write_bytes(const std::string& path, const std::string& bytes) {
    std::ofstream(path, std::ios::binary | std::ios::trunc) << bytes;
}

} // namespace

TEST_CASE("hdf5_io: every numeric dataset, appendable ones too, carries a Fletcher32 checksum") {
    TempDir dir;
    const std::string path = dir.file("sweep.h5");
    {
        ResultAppender a(append_schema(path));
        a.append(rows_from(0, 3));
    }
    hid_t file = H5Fopen(path.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT);
    REQUIRE(file >= 0);
    for (const char* name : {"case", "flux", "regime", "profile", "level"}) {
        CAPTURE(name);
        hid_t dataset = H5Dopen2(file, name, H5P_DEFAULT);
        hid_t dcpl = H5Dget_create_plist(dataset);
        unsigned flags = 0;
        std::size_t count = 0;
        CHECK(H5Pget_filter_by_id2(dcpl, H5Z_FILTER_FLETCHER32, &flags, &count, nullptr, 0, nullptr,
                                   nullptr) >= 0);
        H5Pclose(dcpl);
        H5Dclose(dataset);
    }
    H5Fclose(file);
}

TEST_CASE("hdf5_io: a last chunk torn by a kill is repaired on reopening, other damage refused") {
    // An append rewrites the last, partly filled chunk of every numeric case variable (rows 8
    // and 9 of `flux` here share chunk 0 with rows 0-7; `profile` has 4 rows a chunk). A kill
    // during that write leaves new bytes in part of the chunk and the old checksum after it,
    // while `completed` still counts the old rows. Made here from two states of one file.
    TempDir dir;
    const std::string before = dir.file("before.h5"), after = dir.file("after.h5");
    {
        ResultAppender a(append_schema(before));
        a.append(rows_from(0, 6));
        a.append(rows_from(6, 4)); // 10 rows: profile's chunk 2 holds rows 8 and 9
    }
    fs::copy_file(before, after);
    {
        ResultAppender a(after);
        a.append(rows_from(10, 3));
    }
    const std::string old_bytes = file_bytes(before), new_bytes = file_bytes(after);
    for (const bool grown : {false, true}) {
        CAPTURE(grown);
        const std::string torn = dir.file(grown ? "torn-grown.h5" : "torn.h5");
        std::string bytes = old_bytes;
        for (const auto& [name, index] :
             std::vector<std::pair<const char*, hsize_t>>{{"flux", 0}, {"profile", 2}}) {
            const auto [offset, size] = chunk_at(before, name, index);
            REQUIRE(chunk_at(after, name, index).first == offset); // rewritten in place
            // The new rows are written, the checksum (the last 4 bytes) is not yet.
            bytes.replace(offset, size - 4, new_bytes.substr(offset, size - 4));
        }
        write_bytes(torn, bytes);
        if (grown) { // the interrupted block's extent reached the disk too
            hid_t file = H5Fopen(torn.c_str(), H5F_ACC_RDWR, H5P_DEFAULT);
            REQUIRE(file >= 0);
            for (const char* name : {"case", "flux", "regime", "label", "profile"}) {
                hid_t dataset = H5Dopen2(file, name, H5P_DEFAULT);
                hsize_t extent[2] = {13, std::string(name) == "profile" ? levels
                                                                        : species_names.size()};
                CHECK(H5Dset_extent(dataset, extent) >= 0);
                H5Dclose(dataset);
            }
            H5Fclose(file);
        }
        CHECK_THROWS_WITH_AS(read_doubles(torn, "flux"),
                             doctest::Contains("dataset 'flux' fails its Fletcher32 checksum"),
                             FileError);
        // A byte of a committed row changed as well: not the torn write, refused.
        std::string damaged = file_bytes(torn);
        const auto [offset, size] = chunk_at(torn, "flux", 0);
        REQUIRE(size > 40);
        damaged[offset + 3 * 8 + 2] = static_cast<char>(damaged[offset + 3 * 8 + 2] ^ 0x10);
        const std::string bad = dir.file("bad.h5");
        write_bytes(bad, damaged);
        CHECK_THROWS_WITH_AS(ResultAppender{bad},
                             doctest::Contains("is damaged: dataset 'flux' fails its Fletcher32 "
                                               "checksum; it was not used"),
                             FileError);
        {
            ResultAppender a(torn);
            CHECK(a.completed() == 10);
            CHECK(a.repaired());
            CHECK(a.discarded_rows() == (grown ? 3 : 0));
        }
        check_rows(torn, 10);
        {
            ResultAppender a(torn);
            CHECK_FALSE(a.repaired());
            a.append(rows_from(10, 7));
        }
        check_rows(torn, 17);
    }
}

TEST_CASE("hdf5_io: a process killed while appending leaves every completed row readable") {
    // Kill a writing child process at random moments and check the protocol: the file opens,
    // `completed` covers at least every block the child saw finish, and those rows are exact.
    TempDir dir;
    std::mt19937 random(20240611);
    std::uniform_int_distribution<int> delay_us(0, 40000);
    const int trials = 30;
    int torn = 0, repaired = 0, opened = 0;
    std::size_t most_rows = 0;
    for (int trial = 0; trial < trials; ++trial) {
        const std::string path = dir.file("killed-" + std::to_string(trial) + ".h5");
        int progress[2];
        REQUIRE(::pipe(progress) == 0);
        const pid_t child = ::fork();
        REQUIRE(child >= 0);
        if (child == 0) {
            ::close(progress[0]);
            try {
                ResultAppender a(append_schema(path));
                std::uint64_t row = 0;
                for (;;) {
                    const std::uint64_t n = 1 + row % 37;
                    a.append(rows_from(row, n));
                    row += n;
                    if (::write(progress[1], &row, sizeof row) != sizeof row)
                        ::_exit(3);
                }
            } catch (...) {
                ::_exit(2);
            }
        }
        ::close(progress[1]);
        struct Reaper { // never leave the child running if a check below throws
            pid_t pid;
            ~Reaper() {
                if (pid > 0) {
                    ::kill(pid, SIGKILL);
                    ::waitpid(pid, nullptr, 0);
                }
            }
        } reaper{child};
        std::uint64_t reported = 0, value = 0;
        REQUIRE(::read(progress[0], &reported, sizeof reported) == sizeof reported);
        ::usleep(static_cast<useconds_t>(delay_us(random)));
        ::kill(child, SIGKILL);
        int status = 0;
        ::waitpid(child, &status, 0);
        reaper.pid = -1;
        CHECK(WIFSIGNALED(status));
        while (::read(progress[0], &value, sizeof value) == sizeof value)
            reported = value;
        ::close(progress[0]);

        CAPTURE(trial);
        CAPTURE(reported);
        ResultAppender a(path);
        ++opened;
        CHECK(a.completed() >= reported);
        torn += a.discarded_rows() > 0;
        repaired += a.repaired();
        most_rows = std::max(most_rows, a.completed());
        const std::size_t n = a.completed();
        a.close();
        check_rows(path, n);
    }
    CHECK(opened == trials);
    MESSAGE("killed " << trials << " appending processes; " << torn
                      << " left a torn block that reopening cut off, " << repaired
                      << " needed a repair (end of allocation or a torn last chunk); up to "
                      << most_rows << " rows");
}

TEST_CASE("hdf5_io: only an empty file or an exosieve result is replaced, locks are reported") {
    TempDir dir;
    const std::string notes = dir.file("notes.csv");
    std::ofstream(notes) << "case,planet_mass [M_earth]\nA,1\n";
    CHECK_THROWS_WITH_AS(ResultWriter(notes, "{}"),
                         doctest::Contains("is not an exosieve result file; it was left alone"),
                         InputError);
    std::ifstream kept(notes);
    CHECK(std::string(std::istreambuf_iterator<char>(kept), {}) ==
          "case,planet_mass [M_earth]\nA,1\n");
    const std::string empty = dir.file("empty.h5");
    std::ofstream(empty).close();
    {
        ResultWriter writer(empty, "{}");
        writer.add_case_variable("n", ValueType::int64, {}, "1", "count");
        ResultAppender appender(std::move(writer));
        CHECK(file_is_locked(empty));
        CHECK_THROWS_WITH_AS(ResultWriter(empty, "{}"), doctest::Contains("is locked"), FileError);
        CHECK_THROWS_WITH_AS(ResultAppender{empty}, doctest::Contains("is locked"), FileError);
        CHECK(read_int_attribute(empty, "/", "completed") == 0); // readers take no lock
    }
    CHECK_FALSE(file_is_locked(empty));
    ResultWriter again(empty, "{}"); // our own result: may be replaced
    again.commit();
}

TEST_CASE("hdf5_io: damaged string heaps are refused, never followed") {
    TempDir dir;
    const std::string path = dir.file("strings.h5");
    {
        ResultWriter w(path, "{}");
        w.add_coordinate("species", std::vector<std::string>{"H", "He", "N2"}, "species");
        w.commit();
    }
    std::string bytes;
    {
        std::ifstream in(path, std::ios::binary);
        bytes.assign(std::istreambuf_iterator<char>(in), {});
    }
    const std::size_t heap = bytes.find("GCOL");
    REQUIRE(heap != std::string::npos);
    int refused = 0;
    // Each byte of the collection header and of the first objects (index, size, text).
    for (std::size_t k = 0; k < 64; ++k) {
        std::string bad = bytes;
        bad[heap + k] = static_cast<char>(bad[heap + k] ^ 0xFF);
        const std::string copy = dir.file("bad.h5");
        std::ofstream(copy, std::ios::binary | std::ios::trunc) << bad;
        try {
            const std::vector<std::string> names = read_strings(copy, "species");
            CHECK(names.size() == 3);
        } catch (const FileError& e) {
            ++refused;
            CHECK(std::string(e.what()).find("'species'") != std::string::npos);
        }
    }
    CHECK(refused >= 8); // the collection's signature, version, size and object headers
}

TEST_CASE("hdf5_io: a background appender appends every block in order; drain() waits") {
    TempDir dir;
    const std::string path = dir.file("behind.h5");
    ResultAppender a(append_schema(path));
    CHECK_THROWS_WITH_AS(BackgroundAppender(a, 0), "capacity must be >= 1 [blocks], got 0",
                         InputError);
    std::size_t rows = 0;
    {
        BackgroundAppender writer(a, 2);
        // More blocks than the queue holds: push() waits for room, the order is kept. Every
        // other block is a spare one refilled (after the first appends, an appended block).
        CHECK(writer.spare().rows() == 0); // none appended yet: an empty block
        for (std::size_t k = 0; k < 12; ++k) {
            const std::size_t n = 1 + (k * 7) % 23;
            if (k % 2 == 0) {
                writer.push(rows_from(rows, n));
            } else {
                RowBlock block = writer.spare();
                refill(block, rows, n);
                writer.push(std::move(block));
            }
            rows += n;
        }
        writer.drain();
        CHECK(writer.appended() == 12);
        CHECK(writer.spare().rows() > 0); // an appended block, kept for reuse
        CHECK(a.completed() == rows);
        CHECK(read_int_attribute(path, "/", "completed") == static_cast<std::int64_t>(rows));
        // Blocks still queued when the writer goes are appended first.
        writer.push(rows_from(rows, 5));
        writer.push(rows_from(rows + 5, 3));
        rows += 8;
    }
    CHECK(a.completed() == rows);
    a.close();
    check_rows(path, rows);
}

TEST_CASE("hdf5_io: a failed background append is reported, and nothing is appended after it") {
    TempDir dir;
    const std::string path = dir.file("failed.h5");
    ResultAppender a(append_schema(path));
    {
        BackgroundAppender writer(a, 1);
        writer.push(rows_from(0, 7));
        RowBlock bad = rows_from(7, 2);
        bad.set("regime", std::vector<std::int64_t>{1}); // 1 value for 2 rows
        writer.push(std::move(bad));
        CHECK_THROWS_WITH_AS(writer.drain(), doctest::Contains("'regime' has 1 values"),
                             InputError);
        CHECK_THROWS_AS(writer.drain(), InputError); // again on every later call
        CHECK_THROWS_AS(writer.push(rows_from(7, 2)), InputError);
        CHECK(writer.appended() == 1);
    }
    CHECK(a.completed() == 7);
    a.close();
    check_rows(path, 7);
}

TEST_CASE("hdf5_io: a process killed while its background appender writes keeps every drained "
          "row") {
    // As for direct appends: kill a child at random moments; every row it saw drained is in
    // the reopened file, exact, and the file opens.
    TempDir dir;
    std::mt19937 random(20261203);
    std::uniform_int_distribution<int> delay_us(0, 40000);
    const int trials = 15;
    int opened = 0;
    for (int trial = 0; trial < trials; ++trial) {
        const std::string path = dir.file("killed-behind-" + std::to_string(trial) + ".h5");
        int progress[2];
        REQUIRE(::pipe(progress) == 0);
        const pid_t child = ::fork();
        REQUIRE(child >= 0);
        if (child == 0) {
            ::close(progress[0]);
            try {
                ResultAppender a(append_schema(path));
                BackgroundAppender writer(a, 2);
                std::uint64_t row = 0;
                for (std::uint64_t k = 0;; ++k) {
                    const std::uint64_t n = 1 + row % 37;
                    writer.push(rows_from(row, n));
                    row += n;
                    if (k % 3 == 2) { // report only what is drained
                        writer.drain();
                        if (::write(progress[1], &row, sizeof row) != sizeof row)
                            ::_exit(3);
                    }
                }
            } catch (...) {
                ::_exit(2);
            }
        }
        ::close(progress[1]);
        struct Reaper {
            pid_t pid;
            ~Reaper() {
                if (pid > 0) {
                    ::kill(pid, SIGKILL);
                    ::waitpid(pid, nullptr, 0);
                }
            }
        } reaper{child};
        std::uint64_t reported = 0, value = 0;
        REQUIRE(::read(progress[0], &reported, sizeof reported) == sizeof reported);
        ::usleep(static_cast<useconds_t>(delay_us(random)));
        ::kill(child, SIGKILL);
        int status = 0;
        ::waitpid(child, &status, 0);
        reaper.pid = -1;
        CHECK(WIFSIGNALED(status));
        while (::read(progress[0], &value, sizeof value) == sizeof value)
            reported = value;
        ::close(progress[0]);

        CAPTURE(trial);
        CAPTURE(reported);
        ResultAppender a(path);
        ++opened;
        CHECK(a.completed() >= reported);
        const std::size_t n = a.completed();
        a.close();
        check_rows(path, n);
    }
    CHECK(opened == trials);
}
