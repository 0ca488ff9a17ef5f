// The standard normal upper tail Phi_c(z) = P(Z > z) in log space, and its inverse.
#pragma once

namespace boldsum {

// log Phi_c(z) for any z (finite for every finite z). Beyond z = 37, where Phi_c
// underflows, the asymptotic Mills-ratio series (Abramowitz & Stegun 26.2.12) is used.
double LogNormalUpperTail(double z);

}  // namespace boldsum
