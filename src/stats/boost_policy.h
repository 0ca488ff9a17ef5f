// The Boost.Math policy used inside boldsum_stats: evaluation problems give NaN or
// infinity instead of throwing, because only boldsum::Error may leave the core and the
// callers already screen their arguments. Double arithmetic is promoted internally
// (Boost's default), which is what makes the tail probabilities accurate to ~1e-16.
#pragma once

#include <boost/math/policies/policy.hpp>

namespace boldsum {

using StatsPolicy = boost::math::policies::policy<
    boost::math::policies::domain_error<boost::math::policies::ignore_error>,
    boost::math::policies::pole_error<boost::math::policies::ignore_error>,
    boost::math::policies::overflow_error<boost::math::policies::ignore_error>,
    boost::math::policies::evaluation_error<boost::math::policies::ignore_error>>;

// Tail probabilities below this are taken through logarithms: Boost's results lose
// relative accuracy as they approach the subnormal range (DBL_MIN ~ 2.2e-308).
constexpr double kSmallestDirectTail = 1e-300;

}  // namespace boldsum
