// Runs -> subject: inverse-variance fixed-effects combination of contrast estimates.
#pragma once

#include <vector>

#include "boldsum/fit.h"

namespace boldsum {

// Per voxel, with W_r = Cov_r^-1: Cov = (sum W_r)^-1, effect = Cov * sum W_r e_r,
// dof = sum dof_r. Only estimable runs are passed in; a voxel is valid when it is
// valid in every run given and every Cov_r there is finite and invertible (positive
// definite, reciprocal condition number of its correlation form >= 1e-12); effect and
// covariance are NaN where not valid. Throws Error when `runs` is empty, holds a null
// or non-estimable run, or shapes (q, V) differ.
ContrastEstimate CombineFixedEffects(const std::vector<const ContrastEstimate*>& runs);

}  // namespace boldsum
