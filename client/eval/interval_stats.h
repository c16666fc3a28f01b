// Confidence intervals for the evaluator's figures: how sure a rate or an error percentile is.
//
//  - Rates (availability, recall@N, refined share, radius95 coverage): k successes of n trials,
//    read as independent. WilsonInterval is the score interval of Wilson (1927), recommended by
//    Agresti & Coull (1998) and Newcombe (1998) as close to its nominal coverage even for small n
//    or k near 0 or n. ClopperPearsonInterval is the exact interval (Clopper & Pearson 1934):
//    never below its nominal coverage, so wider; ClopperPearsonUpperBound is its one-sided
//    upper bound, the figure for "0 misleading fixes of n" (1 - alpha^(1/n) for k = 0).
//    Neighbouring frames of a drive are correlated, so treating them as independent trials
//    makes these intervals too narrow (optimistic); they say how sure a figure is at best.
//  - Statistics of correlated values (median, p95 error): BlockBootstrapInterval resamples
//    whole blocks (e.g. a street segment, a run of consecutive queries) with replacement and
//    reports the percentile interval of the statistic over the resamples (Efron & Tibshirani
//    1993, ch. 13; the moving-block idea of Kuensch 1989 with fixed, non-overlapping blocks).
//
// All functions are pure and thread-safe; the bootstrap is deterministic for a given seed (and
// standard library: std::uniform_int_distribution is implementation-defined).
#pragma once

#include <cstdint>
#include <functional>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix {

// How an interval was computed: each function below sets its own, so a figure's interval can say
// where it came from beside it (route_eval.h IntervalTag).
enum class IntervalMethod { kUnspecified, kWilson, kClopperPearson, kBlockBootstrap };

// A two-sided interval [low, high]; for a rate both lie in [0, 1].
struct Interval {
  double low = 0;
  double high = 0;
  IntervalMethod method = IntervalMethod::kUnspecified;
};

struct ProportionOptions {
  // Two-sided coverage of the interval (one-sided for ClopperPearsonUpperBound), in (0, 1).
  // 0.95 is the field's usual choice.
  double confidence = 0.95;
  // InvalidArgument naming the field when confidence lies outside (0, 1) or is not a number.
  Status Validate() const;
};

// The Wilson score interval for `successes` of `trials`:
//   centre = (p + z^2/2n) / (1 + z^2/n),  half = z / (1 + z^2/n) * sqrt(p(1-p)/n + z^2/4n^2),
// with p = successes / trials and z the standard normal quantile at 1 - (1 - confidence) / 2.
// low is exactly 0 when successes = 0 and high exactly 1 when successes = trials.
// Fails (InvalidArgument) when trials < 1, successes < 0, successes > trials or the options are
// invalid.
Result<Interval> WilsonInterval(int64_t successes, int64_t trials,
                                const ProportionOptions& options = {});

// The Clopper-Pearson exact interval: low = Beta^-1(alpha/2; k, n-k+1) (0 when k = 0),
// high = Beta^-1(1-alpha/2; k+1, n-k) (1 when k = n), alpha = 1 - confidence. Same failures as
// WilsonInterval; Internal if the incomplete beta inversion fails.
Result<Interval> ClopperPearsonInterval(int64_t successes, int64_t trials,
                                        const ProportionOptions& options = {});

// The one-sided Clopper-Pearson upper bound at `confidence`: Beta^-1(confidence; k+1, n-k),
// 1 when k = n; for k = 0 it equals 1 - (1 - confidence)^(1/n) (about 3/n at 95 %, the "rule of
// three"). Same failures as ClopperPearsonInterval.
Result<double> ClopperPearsonUpperBound(int64_t successes, int64_t trials,
                                        const ProportionOptions& options = {});

// A statistic of a sample, e.g. a mean or a nearest-rank percentile (route_eval.h Percentile).
// Called with a non-empty sample; must be thread-compatible (it is called from one thread).
using SampleStatistic = std::function<double(const std::vector<double>& sample)>;

struct BootstrapOptions {
  double confidence = 0.95;  // two-sided, in (0, 1)
  // Resamples B. 2000 puts the Monte-Carlo error of a 2.5 % endpoint near 0.06 bootstrap
  // standard deviations (normal approximation), small beside the interval's width of ~3.9.
  int resamples = 2000;
  uint64_t seed = 1;  // std::mt19937_64's seed: the same seed gives the same interval
  // InvalidArgument naming the field: confidence outside (0, 1), resamples < 1.
  Status Validate() const;
};

// The block bootstrap percentile interval of `statistic`. Each of B resamples draws
// blocks.size() blocks uniformly with replacement, concatenates their values and applies
// `statistic`; low and high are the alpha/2 and 1 - alpha/2 quantiles of the B results with
// linear interpolation between order statistics (numpy's default, as scipy.stats.bootstrap's
// percentile method uses). With blocks of one value each this is the ordinary bootstrap.
// Limits: the interval is only as good as the blocks are independent of each other and
// numerous: with few blocks (fewer than ~20) it is rough and tends to be too narrow, and the
// percentile bootstrap of an extreme percentile (p95 of few values) is coarse, since the
// resampled p95 can only take values present in the data. Blocks of unequal size give resamples
// of varying size. REQUIRES: statistic is callable.
// Fails (InvalidArgument) when blocks is empty, a block is empty or the options are invalid.
Result<Interval> BlockBootstrapInterval(const std::vector<std::vector<double>>& blocks,
                                        const SampleStatistic& statistic,
                                        const BootstrapOptions& options = {});

// values cut into runs of `block_size` consecutive values, in order; the last run holds the
// remainder (1 to block_size values). Empty for no values. REQUIRES: block_size >= 1.
std::vector<std::vector<double>> ConsecutiveBlocks(const std::vector<double>& values,
                                                   int block_size);

}  // namespace sightfix
