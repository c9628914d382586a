// Statistics of a batch of cells tested together: one figure (capacity,
// resistance) per cell -> mean, sample standard deviation, min, max, median,
// median absolute deviation, and which cells are outliers. Pure functions.
//
// Outlier rule (the modified z-score of Iglewicz and Hoaglin, "How to Detect
// and Handle Outliers", ASQC Basic References in Quality Control vol. 16,
// 1993; from memory):  M_i = 0.6745 (x_i - median) / MAD,  an outlier when
// |M_i| > 3.5. MAD is the median of |x_i - median|; 0.6745 is the 0.75
// quantile of the standard normal distribution, so M is comparable to a z-score
// for normal data. It is used instead of mean ± k·sd because one bad cell in a
// batch of eight inflates the standard deviation enough to hide itself. When
// MAD is 0 (more than half the cells equal), the mean absolute deviation
// around the median is used instead with the factor 0.7979 (= sqrt(2/pi), the
// mean absolute deviation of a standard normal; from memory); when that is 0
// too, no cell is an outlier. Fewer than 3 values: no outliers are flagged.
// See analysis/METHODS.md, "Batches".
#pragma once

#include <optional>
#include <span>
#include <vector>

namespace kp {

inline constexpr double kOutlierModifiedZ = 3.5;

struct BatchStats {
  int n = 0;
  double mean = 0.0;
  std::optional<double> stddev;  // sample standard deviation (n - 1); empty for n < 2
  double min = 0.0, max = 0.0;
  double median = 0.0;
  double mad = 0.0;                        // median absolute deviation from the median (unscaled)
  std::vector<double> modified_z;          // per value, in input order (0 when no scale)
  std::vector<bool> outlier;               // per value, in input order
  // Coefficient of variation, stddev / mean (empty when undefined).
  std::optional<double> cv() const {
    if (!stddev || mean == 0.0) return std::nullopt;
    return *stddev / mean;
  }
};

// Statistics of `values` (any order; empty -> n = 0).
BatchStats ComputeBatchStats(std::span<const double> values);

// Median of `values` (mean of the middle two for an even count); 0 when empty.
double Median(std::vector<double> values);

}  // namespace kp
