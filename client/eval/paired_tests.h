// Paired two-sided tests for comparing two replays of one drive query by query (`sightfix
// compare`): did B change a yes/no outcome, or the error, more than chance would?
//
//  - McNemarTest: McNemar (1947), "Note on the sampling error of the difference between
//    correlated proportions or percentages", Psychometrika 12(2). Only the discordant pairs
//    count: b queries yes in A and no in B, c the other way. Under no change each discordant pair
//    falls either way with probability 1/2. With b + c < 25 the p-value is the exact binomial
//    two-sided one, min(1, 2 P(X <= min(b, c))), X ~ Binomial(b + c, 1/2); otherwise the
//    chi-square statistic with Edwards' continuity correction, (|b - c| - 1)^2 / (b + c), 1 dof.
//    The same choices as statsmodels' mcnemar(table, exact=...) (0.13.5), with one difference:
//    for b = c we clamp |b - c| - 1 at 0 (statistic 0, p = 1) where statsmodels gives
//    1 / (b + c).
//  - WilcoxonSignedRankTest: Wilcoxon (1945), "Individual comparisons by ranking methods",
//    Biometrics Bulletin 1(6). Zero differences are dropped (Wilcoxon's own rule, scipy's
//    zero_method="wilcox"); the rest are ranked by magnitude, ties sharing their mean rank;
//    the statistic is min(W+, W-). The p-value is exact (the null distribution of W+ by
//    counting, as scipy.stats.wilcoxon's method="exact") when no difference was zero, none tie
//    and there are at most 50; otherwise the normal approximation without continuity correction,
//    z = (T - n(n+1)/4) / sqrt((n(n+1)(2n+1) - sum over tie groups of (t^3 - t)/2) / 24),
//    p = 2 (1 - Phi(|z|)), as scipy's method="approx". scipy 1.10's default ("auto") differs
//    only for ties at n <= 50, where it keeps its exact table with a truncated W+; we take the
//    normal approximation with the tie correction there.
// Pure functions; thread-safe.
#pragma once

#include <vector>

namespace sightfix {

// The result of a paired test; p_value is NaN when there was nothing to test (n = 0).
struct PairedTestResult {
  int n = 0;           // McNemar: discordant pairs b + c; Wilcoxon: non-zero differences
  bool exact = false;  // exact p-value (binomial, or the signed-rank distribution)
  double statistic =
      0;               // McNemar: min(b, c) when exact, else the chi-square; Wilcoxon: min(W+, W-)
  double z = 0;        // Wilcoxon's normal approximation only
  double p_value = 0;  // two-sided
  int zeros = 0;       // Wilcoxon: zero differences dropped
  bool ties = false;   // Wilcoxon: some magnitudes tie
};

// Below this many discordant pairs McNemarTest's p-value is the exact binomial one: the
// chi-square approximation is taken as adequate from about 25 discordant pairs on (common
// practice, from memory).
inline constexpr int kMcNemarExactBelow = 25;

// McNemar's test of b pairs yes/no and c pairs no/yes. REQUIRES: b, c >= 0.
PairedTestResult McNemarTest(int b, int c);

// At most this many non-zero differences get the exact signed-rank p-value (scipy's choice).
inline constexpr int kWilcoxonExactMaxN = 50;

// Wilcoxon's signed-rank test of the paired differences (e.g. error in B minus error in A).
// REQUIRES: every difference is finite.
PairedTestResult WilcoxonSignedRankTest(const std::vector<double>& differences);

}  // namespace sightfix
