// Confidence intervals (client/eval/interval_stats.h) against an outside source: every expected
// value below was computed with SciPy 1.10.1 (Debian's python3-scipy, /usr/bin/python3); the
// command that printed it stands beside the check. Abbreviations in those commands:
//   B = "from scipy.stats import binomtest as B"; beta = "from scipy.stats import beta".
#include "client/eval/interval_stats.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <numeric>
#include <vector>

namespace sightfix {
namespace {

// Printed to 12 decimals; the formulas are evaluated in double precision on both sides.
constexpr double kTol = 1e-9;

struct Case {
  int64_t k, n;
  double low, high;
};

void ExpectInterval(const Result<Interval>& r, double low, double high, double tol) {
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  EXPECT_NEAR(r->low, low, tol);
  EXPECT_NEAR(r->high, high, tol);
}

TEST(IntervalStatsTest, WilsonAgreesWithScipy) {
  // python3 -c 'from scipy.stats import binomtest as B; r = B(k, n).proportion_ci(
  //   method="wilson"); print("%.12f %.12f" % (r.low, r.high))' for each (k, n) below.
  const Case cases[] = {{0, 10, 0.0, 0.277532799863},
                        {1, 10, 0.017876213095, 0.404150026795},
                        {5, 10, 0.236593090513, 0.763406909487},
                        {10, 10, 0.722467200137, 1.0},
                        {3, 6, 0.187616306483, 0.812383693517},
                        {81, 263, 0.255288519878, 0.366209576983},
                        {97, 100, 0.915480635709, 0.989745475976},
                        {0, 500, 0.0, 0.007624340462}};
  for (const Case& c : cases) {
    SCOPED_TRACE(std::to_string(c.k) + " of " + std::to_string(c.n));
    ExpectInterval(WilsonInterval(c.k, c.n), c.low, c.high, kTol);
  }
  // Exact ends: 0 of n starts at 0, n of n ends at 1.
  EXPECT_EQ(WilsonInterval(0, 7)->low, 0.0);
  EXPECT_EQ(WilsonInterval(7, 7)->high, 1.0);
  // Other confidence: B(81, 263).proportion_ci(confidence_level=0.9, method="wilson").
  ExpectInterval(WilsonInterval(81, 263, {0.9}), 0.263313617188, 0.356566349608, kTol);
  // B(3, 6).proportion_ci(confidence_level=0.9, method="wilson").
  ExpectInterval(WilsonInterval(3, 6, {0.9}), 0.221259986140, 0.778740013860, kTol);
}

TEST(IntervalStatsTest, ClopperPearsonAgreesWithScipy) {
  // python3 -c 'from scipy.stats import binomtest as B; r = B(k, n).proportion_ci(
  //   method="exact"); print("%.12f %.12f" % (r.low, r.high))' for each (k, n) below.
  const Case cases[] = {{0, 10, 0.0, 0.308497107819},
                        {1, 10, 0.002528578544, 0.445016117028},
                        {5, 10, 0.187086028447, 0.812913971553},
                        {10, 10, 0.691502892181, 1.0},
                        {3, 6, 0.118117248757, 0.881882751243},
                        {81, 263, 0.252736745585, 0.367621922601},
                        {97, 100, 0.914823947026, 0.993770028462},
                        {0, 500, 0.0, 0.007350610052}};
  for (const Case& c : cases) {
    SCOPED_TRACE(std::to_string(c.k) + " of " + std::to_string(c.n));
    ExpectInterval(ClopperPearsonInterval(c.k, c.n), c.low, c.high, kTol);
  }
  // B(81, 263).proportion_ci(confidence_level=0.9, method="exact").
  ExpectInterval(ClopperPearsonInterval(81, 263, {0.9}), 0.261055746009, 0.358178495576, kTol);
  // B(3, 6).proportion_ci(confidence_level=0.9, method="exact").
  ExpectInterval(ClopperPearsonInterval(3, 6, {0.9}), 0.153161117975, 0.846838882025, kTol);
}

// Newcombe (1998), "Two-sided confidence intervals for the single proportion: comparison of
// seven methods", Statistics in Medicine 17:857-872, worked examples, to 4 decimals (score
// method = Wilson, exact = Clopper-Pearson). From memory; the figures agree with SciPy's to 4
// decimals (B(k, n).proportion_ci(method="wilson") and method="exact").
TEST(IntervalStatsTest, PublishedWorkedExamples) {
  struct Published {
    int64_t k, n;
    double wilson_low, wilson_high, exact_low, exact_high;
  };
  const Published examples[] = {{81, 263, 0.2553, 0.3662, 0.2527, 0.3676},
                                {15, 148, 0.0624, 0.1605, 0.0578, 0.1617},
                                {0, 20, 0.0, 0.1611, 0.0, 0.1684},
                                {1, 29, 0.0061, 0.1718, 0.0009, 0.1776}};
  for (const Published& e : examples) {
    SCOPED_TRACE(std::to_string(e.k) + " of " + std::to_string(e.n));
    ExpectInterval(WilsonInterval(e.k, e.n), e.wilson_low, e.wilson_high, 5e-5);
    ExpectInterval(ClopperPearsonInterval(e.k, e.n), e.exact_low, e.exact_high, 5e-5);
  }
}

TEST(IntervalStatsTest, OneSidedUpperBound) {
  // python3 -c 'from scipy.stats import binomtest as B; print("%.12f" % B(k, n,
  //   alternative="less").proportion_ci(method="exact").high)', equal to
  //   beta.ppf(0.95, k + 1, n - k) to 12 decimals.
  EXPECT_NEAR(*ClopperPearsonUpperBound(0, 500), 0.005973551517, kTol);
  EXPECT_NEAR(*ClopperPearsonUpperBound(0, 10), 0.258865550893, kTol);
  EXPECT_NEAR(*ClopperPearsonUpperBound(2, 40), 0.149151961273, kTol);
  EXPECT_EQ(*ClopperPearsonUpperBound(10, 10), 1.0);
  // 0 of n: the closed form 1 - alpha^(1/n).
  for (int64_t n : {1, 3, 10, 263, 5000})
    EXPECT_NEAR(*ClopperPearsonUpperBound(0, n), 1 - std::pow(0.05, 1.0 / n), 1e-12) << n;
  // 0 of n at 99 %: 1 - 0.01^(1/n).
  EXPECT_NEAR(*ClopperPearsonUpperBound(0, 300, {0.99}), 1 - std::pow(0.01, 1.0 / 300), 1e-12);
}

TEST(IntervalStatsTest, BadCountsAndOptionsAreRefused) {
  EXPECT_EQ(WilsonInterval(0, 0).status().code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(WilsonInterval(5, 4).status().code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(WilsonInterval(-1, 4).status().code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(ClopperPearsonInterval(3, 2).status().code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(ClopperPearsonUpperBound(0, 0).status().code(), StatusCode::kInvalidArgument);
  for (double c : {0.0, 1.0, -0.5, 1.5, std::nan("")}) {
    SCOPED_TRACE(c);
    EXPECT_EQ(WilsonInterval(1, 4, {c}).status().code(), StatusCode::kInvalidArgument);
    EXPECT_EQ(ClopperPearsonInterval(1, 4, {c}).status().code(), StatusCode::kInvalidArgument);
    EXPECT_EQ(ClopperPearsonUpperBound(1, 4, {c}).status().code(), StatusCode::kInvalidArgument);
    BootstrapOptions o;
    o.confidence = c;
    EXPECT_NE(o.Validate().message().find("confidence"), std::string::npos);
  }
  BootstrapOptions none;
  none.resamples = 0;
  EXPECT_NE(none.Validate().message().find("resamples"), std::string::npos);
  const SampleStatistic first = [](const std::vector<double>& v) { return v[0]; };
  EXPECT_EQ(BlockBootstrapInterval({}, first).status().code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(BlockBootstrapInterval({{1.0}, {}}, first).status().code(),
            StatusCode::kInvalidArgument);
  EXPECT_EQ(BlockBootstrapInterval({{1.0}}, first, none).status().code(),
            StatusCode::kInvalidArgument);
}

double Mean(const std::vector<double>& v) {
  return std::accumulate(v.begin(), v.end(), 0.0) / static_cast<double>(v.size());
}

// 200 skewed values (exponential quantiles at a scrambled grid), the same in the SciPy command.
std::vector<double> SkewedValues() {
  std::vector<double> x;
  for (int i = 0; i < 200; ++i) x.push_back(-std::log(1 - ((37 * i) % 101 + 0.5) / 101));
  return x;
}

std::vector<std::vector<double>> SingleValueBlocks(const std::vector<double>& values) {
  return ConsecutiveBlocks(values, 1);
}

TEST(IntervalStatsTest, BootstrapOfIndependentValuesAgreesWithScipy) {
  const std::vector<double> x = SkewedValues();
  // python3 -c 'import numpy as np; from scipy.stats import bootstrap;
  //   x = np.array([-np.log(1 - ((37 * i) % 101 + 0.5) / 101) for i in range(200)]);
  //   r = bootstrap((x,), np.mean, method="percentile", n_resamples=100000,
  //   random_state=1).confidence_interval; print("%.6f %.6f" % (r.low, r.high))'
  // prints 0.866305 1.139978 (random_state 2: 0.867795 1.140134; 3: 0.867613 1.140390).
  const double scipy_low = 0.866305, scipy_high = 1.139978;
  // Tolerance: an endpoint at the 2.5 % quantile of B resamples has a Monte-Carlo standard error
  // of about sqrt(0.025 * 0.975 / B) / phi(1.96) bootstrap standard deviations (normal
  // approximation of the quantile's sampling error): 0.060 sd for our B = 2000, 0.0085 sd for
  // SciPy's 100000, together 0.061 sd. The bootstrap sd of a mean is the plug-in sd / sqrt(n)
  // (0.0696 here); four standard errors: 0.24 sd, about 0.017.
  double sum_sq = 0;
  const double mean = Mean(x);
  for (double v : x) sum_sq += (v - mean) * (v - mean);
  const double bootstrap_sd = std::sqrt(sum_sq / x.size()) / std::sqrt(x.size());
  const double z = 1.959964, phi = std::exp(-z * z / 2) / std::sqrt(2 * M_PI);
  const double se =
      std::hypot(std::sqrt(0.025 * 0.975 / 2000) / phi, std::sqrt(0.025 * 0.975 / 100000) / phi);
  const double tolerance = 4 * se * bootstrap_sd;
  EXPECT_NEAR(tolerance, 0.017, 0.001);
  for (uint64_t seed : {1, 2, 3}) {
    BootstrapOptions o;
    o.seed = seed;
    SCOPED_TRACE(seed);
    ExpectInterval(BlockBootstrapInterval(SingleValueBlocks(x), Mean, o), scipy_low, scipy_high,
                   tolerance);
  }
}

double Width(const Result<Interval>& r) { return r.ok() ? r->high - r->low : -1; }

TEST(IntervalStatsTest, CorrelatedBlocksWidenTheInterval) {
  // 20 blocks, each one value repeated 10 times: 20 independent values, not 200. The naive
  // bootstrap (every value its own block) believes in 200 and is about sqrt(10) = 3.2 times too
  // narrow; the block bootstrap resamples the 20 blocks.
  const std::vector<double> x = SkewedValues();
  std::vector<std::vector<double>> blocks;
  std::vector<double> flat;
  for (int j = 0; j < 20; ++j) {
    blocks.emplace_back(10, x[j]);
    flat.insert(flat.end(), 10, x[j]);
  }
  const double block_width = Width(BlockBootstrapInterval(blocks, Mean));
  const double naive_width = Width(BlockBootstrapInterval(SingleValueBlocks(flat), Mean));
  ASSERT_GT(naive_width, 0);
  EXPECT_GT(block_width / naive_width, 2.5);
  EXPECT_LT(block_width / naive_width, 4.0);
}

TEST(IntervalStatsTest, EqualBlocksOfAMeanAreTheBootstrapOfBlockMeans) {
  // The mean of equal-size blocks is the mean of their means, and the resampler draws the same
  // block indices for the same seed and block count: the two intervals agree to rounding.
  const std::vector<double> x = SkewedValues();
  const std::vector<std::vector<double>> blocks = ConsecutiveBlocks(x, 10);
  ASSERT_EQ(blocks.size(), 20u);
  std::vector<double> block_means;
  for (const std::vector<double>& b : blocks) block_means.push_back(Mean(b));
  const Result<Interval> of_blocks = BlockBootstrapInterval(blocks, Mean);
  ExpectInterval(BlockBootstrapInterval(SingleValueBlocks(block_means), Mean), of_blocks->low,
                 of_blocks->high, 1e-12);
}

TEST(IntervalStatsTest, BootstrapIsDeterministicAndBracketsTheEstimate) {
  const std::vector<double> x = SkewedValues();
  const SampleStatistic p95 = [](std::vector<double> v) {
    std::sort(v.begin(), v.end());  // nearest rank, as route_eval.h's Percentile
    return v[static_cast<size_t>(std::ceil(0.95 * v.size())) - 1];
  };
  const std::vector<std::vector<double>> blocks = ConsecutiveBlocks(x, 10);
  const Result<Interval> a = BlockBootstrapInterval(blocks, p95);
  const Result<Interval> b = BlockBootstrapInterval(blocks, p95);
  ASSERT_TRUE(a.ok() && b.ok());
  EXPECT_EQ(a->low, b->low);
  EXPECT_EQ(a->high, b->high);
  EXPECT_LE(a->low, p95(x));
  EXPECT_GE(a->high, p95(x));
  // Constant data: every resample gives the same value.
  ExpectInterval(BlockBootstrapInterval({{2.5, 2.5}, {2.5}}, p95), 2.5, 2.5, 0);
}

TEST(IntervalStatsTest, ConsecutiveBlocksKeepOrderAndRemainder) {
  const std::vector<std::vector<double>> blocks = ConsecutiveBlocks({1, 2, 3, 4, 5}, 2);
  ASSERT_EQ(blocks.size(), 3u);
  EXPECT_EQ(blocks[0], (std::vector<double>{1, 2}));
  EXPECT_EQ(blocks[2], (std::vector<double>{5}));
  EXPECT_TRUE(ConsecutiveBlocks({}, 10).empty());
}

}  // namespace
}  // namespace sightfix
