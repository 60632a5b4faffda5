#pragma once
//! \file maxwell.hpp
//! Maxwell–Boltzmann speed distribution of a gas in equilibrium at temperature T.
//!
//! With v0 = sqrt(2 k T / m) the most probable speed and x = v / v0:
//!   f(v) = 4/sqrt(pi) v^2/v0^3 exp(-x^2),
//!   P(speed > v) = erfc(x) + 2/sqrt(pi) x exp(-x^2).

#include "exosieve/arrays.hpp"

namespace exosieve {

//! Most probable speed v0 = sqrt(2 k T / m) [m s^-1]; temperature [K], mass [kg].
double most_probable_speed(double temperature, double mass);
//! Mean speed 2 v0 / sqrt(pi) [m s^-1].
double mean_speed(double temperature, double mass);
//! Root-mean-square speed sqrt(3/2) v0 [m s^-1].
double rms_speed(double temperature, double mass);
//! Probability density of the speed [s m^-1] at `speed` [m s^-1].
double speed_pdf(double speed, double temperature, double mass);
//! Fraction of particles faster than `speed` [1]; no cancellation far into the tail.
double fraction_faster(double speed, double temperature, double mass);
//! Natural log of fraction_faster; finite where the fraction itself underflows.
double log_fraction_faster(double speed, double temperature, double mass);
//! Tail fraction as a function of x = v/v0 >= 0 [1].
double tail_fraction(double x);
//! Natural log of tail_fraction(x).
double log_tail_fraction(double x);

//! Array forms: each argument has length 1 or `count`; results go to `out` (length `count`).
void most_probable_speed(ArrayArg temperature, ArrayArg mass, double* out, std::size_t count);
void mean_speed(ArrayArg temperature, ArrayArg mass, double* out, std::size_t count);
void rms_speed(ArrayArg temperature, ArrayArg mass, double* out, std::size_t count);
void speed_pdf(ArrayArg speed, ArrayArg temperature, ArrayArg mass, double* out, std::size_t count);
void fraction_faster(ArrayArg speed, ArrayArg temperature, ArrayArg mass, double* out,
                     std::size_t count);
void log_fraction_faster(ArrayArg speed, ArrayArg temperature, ArrayArg mass, double* out,
                         std::size_t count);

} // namespace exosieve
