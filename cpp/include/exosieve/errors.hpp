#pragma once
//! \file errors.hpp
//! One exception hierarchy: bad input, numerical failure, file failure.

#include <stdexcept>
#include <string>

namespace exosieve {

//! Base of every exception thrown by exosieve.
class Error : public std::runtime_error {
  public:
    using std::runtime_error::runtime_error;
};

//! Bad input: raised before any work starts; maps to Python ValueError.
class InputError : public Error {
  public:
    using Error::Error;
};

//! A computation that could not complete (no progress, no root, overflow).
class NumericalError : public Error {
  public:
    using Error::Error;
};

//! A file could not be created, written or read (HDF5 or file-system failure); names the path.
class FileError : public Error {
  public:
    using Error::Error;
};

//! Format a value for an error message with full precision ("-5", "nan", "1.5e-30").
std::string format_value(double value);

//! Throw InputError unless `value` is finite and > 0. `what` names the argument.
void require_positive(const char* what, double value);

//! Throw InputError unless `value` is finite and >= 0. `what` names the argument.
void require_non_negative(const char* what, double value);

//! Throw InputError unless `value` is finite. `what` names the argument.
void require_finite(const char* what, double value);

} // namespace exosieve
