#include "client/eval/interval_stats.h"

#include <algorithm>
#include <boost/math/special_functions/beta.hpp>
#include <boost/math/special_functions/erf.hpp>
#include <cmath>
#include <cstddef>
#include <exception>
#include <random>
#include <string>
#include <utility>

namespace sightfix {
namespace {

// confidence in the open interval (0, 1); false for NaN too.
bool IsOpenUnit(double confidence) { return confidence > 0 && confidence < 1; }

Status CheckCounts(int64_t successes, int64_t trials, const ProportionOptions& options) {
  if (Status s = options.Validate(); !s.ok()) return s;
  if (trials < 1) return Status::InvalidArgument("trials must be at least 1");
  if (successes < 0 || successes > trials)
    return Status::InvalidArgument("successes " + std::to_string(successes) +
                                   " outside [0, trials = " + std::to_string(trials) + "]");
  return Status::Ok();
}

// Beta^-1(p; a, b), the inverse of the regularized incomplete beta I_x(a, b) in x.
// REQUIRES: a > 0, b > 0, 0 <= p <= 1. Boost.Math throws on evaluation errors; they become a
// Status here.
Result<double> InverseBeta(double a, double b, double p) {
  try {
    return boost::math::ibeta_inv(a, b, p);
  } catch (const std::exception& e) {
    return Status::Internal(std::string("incomplete beta inversion failed: ") + e.what());
  }
}

// Linear interpolation between order statistics of sorted values at q in [0, 1] (numpy's
// default percentile method). REQUIRES: sorted is non-empty and ascending.
double InterpolatedQuantile(const std::vector<double>& sorted, double q) {
  const double position = q * static_cast<double>(sorted.size() - 1);
  const size_t below = static_cast<size_t>(std::floor(position));
  const size_t above = std::min(below + 1, sorted.size() - 1);
  const double fraction = position - static_cast<double>(below);
  return sorted[below] + fraction * (sorted[above] - sorted[below]);
}

// One resample: blocks.size() blocks drawn uniformly with replacement, values concatenated.
std::vector<double> ResampleBlocks(const std::vector<std::vector<double>>& blocks,
                                   std::mt19937_64& rng) {
  std::uniform_int_distribution<size_t> pick(0, blocks.size() - 1);
  std::vector<double> sample;
  for (size_t i = 0; i < blocks.size(); ++i) {
    const std::vector<double>& block = blocks[pick(rng)];
    sample.insert(sample.end(), block.begin(), block.end());
  }
  return sample;
}

}  // namespace

Status ProportionOptions::Validate() const {
  if (!IsOpenUnit(confidence))
    return Status::InvalidArgument("ProportionOptions.confidence must lie in (0, 1)");
  return Status::Ok();
}

Status BootstrapOptions::Validate() const {
  if (!IsOpenUnit(confidence))
    return Status::InvalidArgument("BootstrapOptions.confidence must lie in (0, 1)");
  if (resamples < 1) return Status::InvalidArgument("BootstrapOptions.resamples must be >= 1");
  return Status::Ok();
}

Result<Interval> WilsonInterval(int64_t successes, int64_t trials,
                                const ProportionOptions& options) {
  if (Status s = CheckCounts(successes, trials, options); !s.ok()) return s;
  // The standard normal quantile at 1 - alpha/2 is sqrt(2) erfc^-1(alpha).
  const double z = std::sqrt(2.0) * boost::math::erfc_inv(1 - options.confidence);
  const double n = static_cast<double>(trials);
  const double p = static_cast<double>(successes) / n;
  const double z2 = z * z;
  const double denominator = 1 + z2 / n;
  const double centre = (p + z2 / (2 * n)) / denominator;
  const double half = z / denominator * std::sqrt(p * (1 - p) / n + z2 / (4 * n * n));
  Interval interval{std::max(0.0, centre - half), std::min(1.0, centre + half),
                    IntervalMethod::kWilson};
  // Analytically exact at the ends; rounding would leave a few ulps.
  if (successes == 0) interval.low = 0;
  if (successes == trials) interval.high = 1;
  return interval;
}

Result<Interval> ClopperPearsonInterval(int64_t successes, int64_t trials,
                                        const ProportionOptions& options) {
  if (Status s = CheckCounts(successes, trials, options); !s.ok()) return s;
  const double alpha = 1 - options.confidence;
  const double k = static_cast<double>(successes), n = static_cast<double>(trials);
  Interval interval{0, 1, IntervalMethod::kClopperPearson};
  if (successes > 0) {
    Result<double> low = InverseBeta(k, n - k + 1, alpha / 2);
    if (!low.ok()) return low.status();
    interval.low = *low;
  }
  if (successes < trials) {
    Result<double> high = InverseBeta(k + 1, n - k, 1 - alpha / 2);
    if (!high.ok()) return high.status();
    interval.high = *high;
  }
  return interval;
}

Result<double> ClopperPearsonUpperBound(int64_t successes, int64_t trials,
                                        const ProportionOptions& options) {
  if (Status s = CheckCounts(successes, trials, options); !s.ok()) return s;
  if (successes == trials) return 1.0;
  const double k = static_cast<double>(successes), n = static_cast<double>(trials);
  return InverseBeta(k + 1, n - k, options.confidence);
}

Result<Interval> BlockBootstrapInterval(const std::vector<std::vector<double>>& blocks,
                                        const SampleStatistic& statistic,
                                        const BootstrapOptions& options) {
  if (Status s = options.Validate(); !s.ok()) return s;
  if (blocks.empty()) return Status::InvalidArgument("block bootstrap of no blocks");
  for (size_t i = 0; i < blocks.size(); ++i)
    if (blocks[i].empty())
      return Status::InvalidArgument("block " + std::to_string(i) + " of the bootstrap is empty");
  std::mt19937_64 rng(options.seed);
  std::vector<double> results;
  results.reserve(static_cast<size_t>(options.resamples));
  for (int b = 0; b < options.resamples; ++b)
    results.push_back(statistic(ResampleBlocks(blocks, rng)));
  std::sort(results.begin(), results.end());
  const double alpha = 1 - options.confidence;
  return Interval{InterpolatedQuantile(results, alpha / 2),
                  InterpolatedQuantile(results, 1 - alpha / 2), IntervalMethod::kBlockBootstrap};
}

std::vector<std::vector<double>> ConsecutiveBlocks(const std::vector<double>& values,
                                                   int block_size) {
  std::vector<std::vector<double>> blocks;
  const size_t size = static_cast<size_t>(std::max(block_size, 1));
  for (size_t start = 0; start < values.size(); start += size) {
    const size_t end = std::min(start + size, values.size());
    blocks.emplace_back(values.begin() + static_cast<std::ptrdiff_t>(start),
                        values.begin() + static_cast<std::ptrdiff_t>(end));
  }
  return blocks;
}

}  // namespace sightfix
