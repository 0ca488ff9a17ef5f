// Robust standardisation for spotting values that stand far from the rest.
#pragma once

#include <vector>

namespace boldsum {

// The median of the finite values (mean of the two middle ones for an even count);
// NaN when there is none.
double Median(std::vector<double> values);

// Modified z-scores of Iglewicz & Hoaglin (1993, "How to Detect and Handle Outliers",
// ASQC Quality Press): M_i = (x_i - median) / (MAD / 0.6744897501960817), MAD the median
// absolute deviation from the median and 0.674489... = Phi^-1(0.75), so that the scale
// estimates the standard deviation of normal data. Non-finite inputs give NaN and are
// left out of the median and MAD; every score is NaN when MAD is 0 or fewer than three
// values are finite.
std::vector<double> ModifiedZScores(const std::vector<double>& values);

// |M| above this marks a possible outlier (the cut Iglewicz & Hoaglin recommend;
// common practice, value recalled from memory).
inline constexpr double kOutlierModifiedZ = 3.5;

}  // namespace boldsum
