#pragma once
/// \file fit_profile.hpp
/// Profile-likelihood mass-separation curves from the deep fit's model
/// (`heft fit --profile`, `heft curve --method profile`).

#include <string>
#include <vector>

#include "heft/curve.hpp"
#include "heft/fit_model.hpp"

namespace heft {

/// Profile-likelihood curve: for each a of `a_au`, -2 ln L minimised over
/// all other parameters (multi-start, continued from the previous a),
/// mass_med the best mass and the 68 / 95 % bounds where Delta(-2 ln L) = 1
/// and 3.84 (NaN where the mass prior's bound is reached first); the weight
/// of a point is its relative profile likelihood exp(-(-2 ln L_min)/2),
/// normalised.
Curve profile_curve(const FitModel& model, const std::vector<double>& a_au, const FitOptions& opt,
                    const std::string& rng_id);

}  // namespace heft
