// The survey error process has the statistics of its definition (a first-order Gauss-Markov
// process, i.e. a Gaussian AR(1) with rho = exp(-dt / tau): Brown & Hwang, Introduction to
// Random Signals and Applied Kalman Filtering): variance sigma^2 from the first sample on, and
// autocorrelation exp(-lag / tau).
//
// Tolerances come from the series length. Consecutive samples are correlated, so a series of N
// carries less information than N independent draws. For a stationary Gaussian AR(1) with
// coefficient rho (Box & Jenkins, Time Series Analysis, and Bartlett's 1946 formula; from
// memory, and confirmed by a Monte-Carlo run of 4000 series with numpy, figures below):
//   mean:            SE = sigma sqrt((1 + rho) / (N (1 - rho)))  (N_eff = N (1 - rho) / (1 + rho))
//   variance:        SE = sigma^2 sqrt(2 (1 + rho^2) / (N (1 - rho^2)))
//   autocorrelation at lag m (r_m = sum x[k] x[k+m] / sum x[k]^2):
//                    SE = sqrt(((1 + rho^2)(1 - rho^2m) / (1 - rho^2) - 2 m rho^2m) / N)
// Monte Carlo (rho = exp(-0.25), N = 4000, 4000 series): standard deviations 0.0444, 0.0443,
// 0.0097 (lag 1), 0.0244 (lag 4) against the formulas' 0.0448, 0.0452, 0.0099, 0.0247. Each
// check allows 4 SE: a correct process fails one of the dozen checks with probability under
// 1e-3 (the series are seeded, so a pass is reproducible).
#include "demo_route/gauss_markov.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <vector>

namespace sightfix::demo {
namespace {

constexpr double kStandardErrors = 4;

// Sample statistics of one axis, with the process's known zero mean.
struct AxisStatistics {
  double mean = 0, variance = 0, lag1 = 0, lag_tau = 0;
};

AxisStatistics Measure(const std::vector<double>& x, int tau_steps) {
  AxisStatistics s;
  double sum = 0, sum_squares = 0, lag1 = 0, lag_tau = 0;
  const size_t n = x.size();
  for (size_t k = 0; k < n; ++k) {
    sum += x[k];
    sum_squares += x[k] * x[k];
    if (k + 1 < n) lag1 += x[k] * x[k + 1];
    if (k + tau_steps < n) lag_tau += x[k] * x[k + tau_steps];
  }
  s.mean = sum / n;
  s.variance = sum_squares / n;
  s.lag1 = lag1 / sum_squares;
  s.lag_tau = lag_tau / sum_squares;
  return s;
}

double AutocorrelationStandardError(double rho, int lag, double n) {
  const double rho_2m = std::pow(rho, 2 * lag);
  return std::sqrt(((1 + rho * rho) * (1 - rho_2m) / (1 - rho * rho) - 2 * lag * rho_2m) / n);
}

// Draws `tau_count` time constants of the process and checks each axis's statistics.
// REQUIRES: tau_s / dt_s is a whole number of steps.
void CheckSeries(const GaussMarkovOptions& options, int tau_count) {
  Result<GaussMarkovError> process = GaussMarkovError::Create(options);
  ASSERT_TRUE(process.ok()) << process.status().ToString();
  const int tau_steps = static_cast<int>(std::lround(options.tau_s / options.dt_s));
  const size_t n = static_cast<size_t>(tau_count) * tau_steps;
  std::vector<double> axes[3];
  for (std::vector<double>& a : axes) a.reserve(n);
  for (size_t k = 0; k < n; ++k) {
    const cv::Vec3d e = process->Next();
    for (int i = 0; i < 3; ++i) axes[i].push_back(e[i]);
  }
  const double rho = std::exp(-options.dt_s / options.tau_s);
  EXPECT_NEAR(process->rho(), rho, 1e-15);
  const double sigmas[3] = {options.sigma_horizontal_m, options.sigma_horizontal_m,
                            options.sigma_vertical_m};
  for (int i = 0; i < 3; ++i) {
    SCOPED_TRACE("axis " + std::to_string(i));
    const AxisStatistics s = Measure(axes[i], tau_steps);
    const double sigma2 = sigmas[i] * sigmas[i];
    const double se_mean = sigmas[i] * std::sqrt((1 + rho) / (n * (1 - rho)));
    const double se_variance = sigma2 * std::sqrt(2 * (1 + rho * rho) / (n * (1 - rho * rho)));
    const double se_lag1 = AutocorrelationStandardError(rho, 1, n);
    const double se_lag_tau = AutocorrelationStandardError(rho, tau_steps, n);
    EXPECT_NEAR(s.mean, 0, kStandardErrors * se_mean);
    EXPECT_NEAR(s.variance, sigma2, kStandardErrors * se_variance);
    EXPECT_NEAR(s.lag1, rho, kStandardErrors * se_lag1);
    EXPECT_NEAR(s.lag_tau, std::exp(-1.0), kStandardErrors * se_lag_tau);
    std::printf("axis %d: mean %+.2f SE, variance %+.2f SE, lag 1 %+.2f SE, lag tau %+.2f SE\n", i,
                s.mean / se_mean, (s.variance - sigma2) / se_variance, (s.lag1 - rho) / se_lag1,
                (s.lag_tau - std::exp(-1.0)) / se_lag_tau);
  }
  // Independent axes: the sample correlation of east and north has SE sqrt((1 + rho^2) /
  // (N (1 - rho^2))) (Bartlett, for two independent AR(1) series with the same rho).
  double en = 0, ee = 0, nn = 0;
  for (size_t k = 0; k < n; ++k) {
    en += axes[0][k] * axes[1][k], ee += axes[0][k] * axes[0][k], nn += axes[1][k] * axes[1][k];
  }
  EXPECT_NEAR(en / std::sqrt(ee * nn), 0,
              kStandardErrors * std::sqrt((1 + rho * rho) / (n * (1 - rho * rho))));
}

// The defaults (tau 60 s at 10 Hz: rho = 0.99833, tau = 600 steps), 10000 time constants.
TEST(GaussMarkovTest, DefaultsHaveTheirVarianceAndCorrelation) {
  CheckSeries(GaussMarkovOptions{}, 10000);
}

// A coarse step (dt = tau / 4: rho = 0.7788, tau = 4 steps) over 25000 time constants, where a
// wrong discretisation shows: an Euler rho = 1 - dt / tau = 0.75 lies 14 SE from exp(-0.25).
TEST(GaussMarkovTest, CoarseStepHasItsVarianceAndCorrelation) {
  GaussMarkovOptions o;
  o.sigma_horizontal_m = 2.0;
  o.sigma_vertical_m = 0.5;
  o.tau_s = 8;
  o.dt_s = 2;
  o.seed = 12;
  CheckSeries(o, 25000);
}

// The start is stationary: over many seeds the first sample, and the second, have variance
// sigma^2 (independent seeds: SE = sigma^2 sqrt(2 / seeds)).
TEST(GaussMarkovTest, StartIsStationary) {
  constexpr int kSeeds = 20000;
  GaussMarkovOptions o;
  o.sigma_horizontal_m = 1.5;
  o.sigma_vertical_m = 3.0;
  double first[3] = {0, 0, 0}, second[3] = {0, 0, 0};
  for (int seed = 0; seed < kSeeds; ++seed) {
    o.seed = 1000 + seed;
    GaussMarkovError process = *GaussMarkovError::Create(o);
    const cv::Vec3d a = process.Next(), b = process.Next();
    for (int i = 0; i < 3; ++i) first[i] += a[i] * a[i], second[i] += b[i] * b[i];
  }
  const double sigmas[3] = {1.5, 1.5, 3.0};
  for (int i = 0; i < 3; ++i) {
    const double sigma2 = sigmas[i] * sigmas[i];
    const double tolerance = kStandardErrors * sigma2 * std::sqrt(2.0 / kSeeds);
    EXPECT_NEAR(first[i] / kSeeds, sigma2, tolerance) << "axis " << i;
    EXPECT_NEAR(second[i] / kSeeds, sigma2, tolerance) << "axis " << i;
  }
}

// Same seed, same series; another seed, another series; sigma 0 is an exact axis.
TEST(GaussMarkovTest, SeedFixesTheSeries) {
  GaussMarkovOptions o;
  o.sigma_vertical_m = 0;
  GaussMarkovError a = *GaussMarkovError::Create(o), b = *GaussMarkovError::Create(o);
  o.seed = 2;
  GaussMarkovError c = *GaussMarkovError::Create(o);
  bool differs = false;
  for (int k = 0; k < 100; ++k) {
    const cv::Vec3d x = a.Next(), y = b.Next(), z = c.Next();
    EXPECT_EQ(x, y);
    EXPECT_EQ(x[2], 0.0);
    differs = differs || x != z;
  }
  EXPECT_TRUE(differs);
}

TEST(GaussMarkovTest, InvalidOptionsNameTheField) {
  const auto message = [](const GaussMarkovOptions& o) {
    const Result<GaussMarkovError> p = GaussMarkovError::Create(o);
    EXPECT_FALSE(p.ok());
    EXPECT_EQ(p.status().code(), StatusCode::kInvalidArgument);
    return p.status().message();
  };
  GaussMarkovOptions o;
  o.sigma_horizontal_m = -0.1;
  EXPECT_NE(message(o).find("sigma_horizontal_m"), std::string::npos);
  o = {};
  o.sigma_vertical_m = std::numeric_limits<double>::quiet_NaN();
  EXPECT_NE(message(o).find("sigma_vertical_m"), std::string::npos);
  o = {};
  o.tau_s = 0;
  EXPECT_NE(message(o).find("tau_s"), std::string::npos);
  o = {};
  o.dt_s = -1;
  EXPECT_NE(message(o).find("dt_s"), std::string::npos);
  EXPECT_TRUE(GaussMarkovOptions{}.Validate().ok());
}

}  // namespace
}  // namespace sightfix::demo
