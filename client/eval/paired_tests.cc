#include "client/eval/paired_tests.h"

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <limits>
#include <numeric>
#include <vector>

namespace sightfix {
namespace {

// P(X <= k) for X ~ Binomial(n, 1/2), by summing C(n, i) / 2^n (exact in doubles for n < 53).
double HalfBinomialCdf(int k, int n) {
  double term = std::ldexp(1.0, -n), sum = 0;  // C(n, 0) / 2^n
  for (int i = 0; i <= k; ++i) {
    sum += term;
    term = term * (n - i) / (i + 1);
  }
  return sum;
}

// Two-sided p of a standard normal deviate z: 2 (1 - Phi(|z|)) = erfc(|z| / sqrt 2).
double TwoSidedNormalP(double z) { return std::erfc(std::fabs(z) / std::sqrt(2.0)); }

// Ranks 1..n of values (sorted ascending by the caller's order), ties sharing their mean rank;
// `ties` set when any two are equal and tie_term = sum over tie groups of t^3 - t.
std::vector<double> MidRanks(const std::vector<double>& sorted, bool* ties, double* tie_term) {
  std::vector<double> rank(sorted.size());
  *ties = false, *tie_term = 0;
  for (size_t i = 0; i < sorted.size();) {
    size_t j = i;
    while (j + 1 < sorted.size() && sorted[j + 1] == sorted[i]) ++j;
    const double t = static_cast<double>(j - i + 1);
    for (size_t k = i; k <= j; ++k) rank[k] = (i + j) / 2.0 + 1;
    if (t > 1) *ties = true, *tie_term += t * t * t - t;
    i = j + 1;
  }
  return rank;
}

// The number of subsets of {1..n} with each sum 0..n(n+1)/2: W+'s null distribution times 2^n.
std::vector<double> SignedRankCounts(int n) {
  std::vector<double> count(static_cast<size_t>(n) * (n + 1) / 2 + 1, 0.0);
  count[0] = 1;
  for (int r = 1; r <= n; ++r)
    for (size_t s = count.size() - 1; s >= static_cast<size_t>(r); --s) count[s] += count[s - r];
  return count;
}

// Exact two-sided p of W+ = w_plus (an integer when there are no ties): min(1, 2 min(P(W+ <= w),
// P(W+ >= w))).
double ExactSignedRankP(int n, int w_plus) {
  const std::vector<double> count = SignedRankCounts(n);
  const double total = std::ldexp(1.0, n);
  const double below = std::accumulate(count.begin(), count.begin() + w_plus + 1, 0.0);
  const double above = std::accumulate(count.begin() + w_plus, count.end(), 0.0);
  return std::min(1.0, 2 * std::min(below, above) / total);
}

}  // namespace

PairedTestResult McNemarTest(int b, int c) {
  PairedTestResult r;
  r.n = b + c;
  if (r.n == 0) {
    r.p_value = std::numeric_limits<double>::quiet_NaN();
    return r;
  }
  r.exact = r.n < kMcNemarExactBelow;
  if (r.exact) {
    r.statistic = std::min(b, c);
    r.p_value = std::min(1.0, 2 * HalfBinomialCdf(std::min(b, c), r.n));
    return r;
  }
  const double excess = std::max(0.0, std::fabs(static_cast<double>(b - c)) - 1);
  r.statistic = excess * excess / r.n;
  r.p_value = std::erfc(std::sqrt(r.statistic / 2));  // chi-square survival, 1 dof
  return r;
}

PairedTestResult WilcoxonSignedRankTest(const std::vector<double>& differences) {
  PairedTestResult r;
  std::vector<double> d;
  for (double x : differences)
    if (x != 0)
      d.push_back(x);
    else
      ++r.zeros;
  r.n = static_cast<int>(d.size());
  if (r.n == 0) {
    r.p_value = std::numeric_limits<double>::quiet_NaN();
    return r;
  }
  std::sort(d.begin(), d.end(), [](double a, double b) { return std::fabs(a) < std::fabs(b); });
  std::vector<double> magnitude(d.size());
  std::transform(d.begin(), d.end(), magnitude.begin(), [](double x) { return std::fabs(x); });
  double tie_term = 0;
  const std::vector<double> rank = MidRanks(magnitude, &r.ties, &tie_term);
  double w_plus = 0, w_minus = 0;
  for (size_t i = 0; i < d.size(); ++i) (d[i] > 0 ? w_plus : w_minus) += rank[i];
  r.statistic = std::min(w_plus, w_minus);
  r.exact = r.zeros == 0 && !r.ties && r.n <= kWilcoxonExactMaxN;
  if (r.exact) {
    r.p_value = ExactSignedRankP(r.n, static_cast<int>(w_plus));
    return r;
  }
  const double n = r.n;
  const double mean = n * (n + 1) / 4;
  const double sd = std::sqrt((n * (n + 1) * (2 * n + 1) - tie_term / 2) / 24);
  r.z = (r.statistic - mean) / sd;
  r.p_value = TwoSidedNormalP(r.z);
  return r;
}

}  // namespace sightfix
