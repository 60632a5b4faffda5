#include "exosieve/stellar.hpp"

#include <cmath>
#include <string>

#include "exosieve/constants.hpp"
#include "exosieve/errors.hpp"

namespace exosieve {

void XuvHistory::validate() const {
    require_positive("saturation_ratio", saturation_ratio);
    require_positive("saturation_time", saturation_time);
    require_positive("decay_index", decay_index);
}

Star::Star(double mass, double luminosity, XuvHistory xuv)
    : mass_(mass), luminosity_(luminosity), xuv_(xuv) {
    require_positive("star mass", mass);
    require_positive("star luminosity", luminosity);
    xuv_.validate();
    log_saturated_ = std::log(xuv_.saturation_ratio * luminosity_);
    log_saturation_time_ = std::log(xuv_.saturation_time);
}

double Star::xuv_luminosity(double t) const {
    require_positive("stellar age t", t);
    const double saturated = xuv_.saturation_ratio * luminosity_;
    if (t <= xuv_.saturation_time)
        return saturated;
    return saturated * std::pow(t / xuv_.saturation_time, -xuv_.decay_index);
}

double Star::log_xuv_luminosity(double t) const {
    require_positive("stellar age t", t);
    if (t <= xuv_.saturation_time)
        return log_saturated_;
    return log_saturated_ - xuv_.decay_index * (std::log(t) - log_saturation_time_);
}

double Star::age_at_xuv_luminosity(double luminosity) const {
    require_positive("xuv luminosity", luminosity);
    const double saturated = xuv_.saturation_ratio * luminosity_;
    if (luminosity >= saturated)
        return xuv_.saturation_time;
    return xuv_.saturation_time * std::pow(luminosity / saturated, -1.0 / xuv_.decay_index);
}

Planet::Planet(double mass, double radius) : mass_(mass), radius_(radius) {
    require_positive("planet mass", mass);
    require_positive("planet radius", radius);
}

Planet::Planet(double mass, double radius, double semi_major_axis, Star star)
    : Planet(mass, radius) {
    require_positive("semi_major_axis", semi_major_axis);
    semi_major_axis_ = semi_major_axis;
    log_sphere_area_ = std::log(4.0 * constants::pi * semi_major_axis * semi_major_axis);
    star_ = std::move(star);
}

double Planet::semi_major_axis() const {
    if (!star_)
        throw InputError("the planet has no semi_major_axis and star set");
    return semi_major_axis_;
}

const Star& Planet::star() const {
    if (!star_)
        throw InputError("the planet has no star set (give semi_major_axis and star)");
    return *star_;
}

double Planet::xuv_flux(double t) const {
    if (!star_)
        throw InputError("the XUV flux needs the planet's semi_major_axis and star, which are not "
                         "set");
    return exosieve::xuv_flux(star_->xuv_luminosity(t), semi_major_axis_);
}

double Planet::log_xuv_flux(double t) const {
    if (!star_)
        throw InputError("the XUV flux needs the planet's semi_major_axis and star, which are not "
                         "set");
    return star_->log_xuv_luminosity(t) - log_sphere_area_;
}

double Planet::surface_gravity() const {
    return constants::G * mass_ / (radius_ * radius_);
}

double xuv_flux(double xuv_luminosity, double distance) {
    require_non_negative("xuv_luminosity", xuv_luminosity);
    require_positive("distance", distance);
    return xuv_luminosity / (4.0 * constants::pi * distance * distance);
}

} // namespace exosieve
