#include "analysis/batch_stats.h"

#include <algorithm>
#include <cmath>

namespace kp {

double Median(std::vector<double> v) {
  if (v.empty()) return 0.0;
  std::sort(v.begin(), v.end());
  const size_t m = v.size() / 2;
  return v.size() % 2 == 1 ? v[m] : 0.5 * (v[m - 1] + v[m]);
}

BatchStats ComputeBatchStats(std::span<const double> values) {
  BatchStats s;
  s.n = static_cast<int>(values.size());
  s.modified_z.assign(values.size(), 0.0);
  s.outlier.assign(values.size(), false);
  if (values.empty()) return s;
  double sum = 0.0;
  s.min = s.max = values[0];
  for (double x : values) {
    sum += x;
    s.min = std::min(s.min, x);
    s.max = std::max(s.max, x);
  }
  s.mean = sum / s.n;
  if (s.n >= 2) {
    double ss = 0.0;  // two-pass: the deviations from the mean, no cancellation
    for (double x : values) ss += (x - s.mean) * (x - s.mean);
    s.stddev = std::sqrt(ss / (s.n - 1));
  }
  s.median = Median(std::vector<double>(values.begin(), values.end()));
  std::vector<double> dev;
  double abs_sum = 0.0;
  for (double x : values) {
    dev.push_back(std::fabs(x - s.median));
    abs_sum += std::fabs(x - s.median);
  }
  s.mad = Median(dev);
  // Scale: 0.6745 / MAD, or 0.7979 / mean absolute deviation when MAD is 0.
  double scale = 0.0;
  if (s.mad > 0.0) scale = 0.6745 / s.mad;
  else if (abs_sum > 0.0) scale = 0.7979 / (abs_sum / s.n);
  if (scale == 0.0) return s;
  for (size_t i = 0; i < values.size(); ++i) {
    s.modified_z[i] = scale * (values[i] - s.median);
    s.outlier[i] = s.n >= 3 && std::fabs(s.modified_z[i]) > kOutlierModifiedZ;
  }
  return s;
}

}  // namespace kp
