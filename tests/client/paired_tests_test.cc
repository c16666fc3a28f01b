// McNemar's and Wilcoxon's signed-rank tests (client/eval/paired_tests.h) against statsmodels
// 0.13.5 and SciPy 1.10.1 (Debian's python3-statsmodels and python3-scipy, /usr/bin/python3).
#include "client/eval/paired_tests.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <string>
#include <utility>
#include <vector>

#include "client/eval/paired_runs.h"

namespace sightfix {
namespace {

// McNemar's test of b yes/no and c no/yes pairs. Literals from
//   python3 -c 'from statsmodels.stats.contingency_tables import mcnemar
//     r = mcnemar([[0, b], [c, 0]], exact=b + c < 25); print(repr(r.statistic), repr(r.pvalue))'
TEST(PairedTestsTest, McNemarAgainstStatsmodels) {
  const struct {
    int b, c;
    bool exact;
    double statistic, p;
  } cases[] = {
      {3, 9, true, 3.0, 0.14599609375},
      {0, 7, true, 0.0, 0.015625},
      {7, 17, true, 7.0, 0.06391465663909912},  // 24 discordant: still exact
      {2, 14, true, 2.0, 0.004180908203125},
      {8, 17, false, 2.56, 0.10959858339911568},  // 25: chi-square, continuity-corrected
      {20, 10, false, 2.7, 0.10034824646229054},
      {5, 20, false, 7.84, 0.005110260660855866},
      {40, 55, false, 2.0631578947368423, 0.15089717233442643},
  };
  for (const auto& c : cases) {
    SCOPED_TRACE(testing::Message() << c.b << " / " << c.c);
    const PairedTestResult r = McNemarTest(c.b, c.c);
    EXPECT_EQ(r.n, c.b + c.c);
    EXPECT_EQ(r.exact, c.exact);
    EXPECT_NEAR(r.statistic, c.statistic, 1e-12);
    EXPECT_NEAR(r.p_value, c.p, 1e-12 + 1e-10 * c.p);
    EXPECT_DOUBLE_EQ(McNemarTest(c.c, c.b).p_value, r.p_value);  // two-sided: symmetric
  }
}

TEST(PairedTestsTest, McNemarEdgeCases) {
  // No discordant pair: nothing to test.
  EXPECT_TRUE(std::isnan(McNemarTest(0, 0).p_value));
  // b = c exactly: p = 1 (exact: 2 P(X <= 4) of Binomial(8, 1/2) = 2 x 163/256 > 1, clipped).
  EXPECT_DOUBLE_EQ(McNemarTest(4, 4).p_value, 1.0);
  // b = c with 30 discordant pairs: the corrected |b - c| - 1 is clamped at 0, so statistic 0
  // and p = 1. statsmodels 0.13.5 gives statistic 1/30 = 0.0333 and p 0.8551321405847059 here
  // (no clamp): the one place we differ on purpose.
  const PairedTestResult even = McNemarTest(15, 15);
  EXPECT_DOUBLE_EQ(even.statistic, 0);
  EXPECT_DOUBLE_EQ(even.p_value, 1);
}

// Differences built the same way in the test and in Python, so both see identical doubles.
std::vector<double> Untied(int n, int shift) {
  std::vector<double> d;
  for (int i = 0; i < n; ++i) d.push_back(((i * 7919) % 1000 - 500 + shift) / 1000.0);
  return d;
}
std::vector<double> Tied(int n, double centre) {
  std::vector<double> d;
  for (int i = 0; i < n; ++i) d.push_back(((i * 37) % 23 - centre) / 100.0);
  return d;
}

// Literals from SciPy 1.10.1:
//   python3 -c 'from scipy.stats import wilcoxon
//     def untied(n, s): return [((i * 7919) % 1000 - 500 + s) / 1000.0 for i in range(n)]
//     def tied(n, c): return [((i * 37) % 23 - c) / 100.0 for i in range(n)]
//     r = wilcoxon(d, method=M); print(repr(float(r.statistic)), repr(float(r.pvalue)))'
// with M = "auto" (scipy's default) where our method choice agrees with it, "approx" where not.
TEST(PairedTestsTest, WilcoxonAgainstScipy) {
  const struct {
    const char* name;
    std::vector<double> d;
    bool exact;
    int zeros;
    double statistic, p;
  } cases[] = {
      // No zero, no tie, n <= 50: exact, as scipy's default.
      {"untied(12, 37)", Untied(12, 37), true, 0, 37.0, 0.90966796875},
      {"untied(20, 150)", Untied(20, 150), true, 0, 39.0, 0.012079238891601562},
      {"untied(30, 110)", Untied(30, 110), true, 0, 121.0, 0.02084985189139843},
      {"untied(45, 130)", Untied(45, 130), true, 0, 273.0, 0.005105324908811326},
      // n > 50: normal approximation, as scipy's default.
      {"untied(80, 60)", Untied(80, 60), false, 0, 1262.0, 0.08596623395066365},
      // A zero (dropped) and ties: normal approximation with the tie correction, as scipy's
      // default at any n.
      {"untied(40, 120)", Untied(40, 120), false, 1, 232.0, 0.027435470781881903},
      {"tied(30, 11)", Tied(30, 11), false, 1, 201.0, 0.7210042746548362},
      {"tied(90, 11)", Tied(90, 11), false, 4, 1851.0, 0.9330154625093978},
      // Ties without zeros at n <= 50: scipy's default keeps its exact table (0.5087660551071167
      // for n = 24, 0.5185272742000961 for n = 40); we take method="approx"'s figures.
      {"tied(24, 11.5)", Tied(24, 11.5), false, 0, 126.5, 0.5016855430324851},
      {"tied(40, 11.5)", Tied(40, 11.5), false, 0, 361.0, 0.5097788688033109},
  };
  for (const auto& c : cases) {
    SCOPED_TRACE(c.name);
    const PairedTestResult r = WilcoxonSignedRankTest(c.d);
    EXPECT_EQ(r.exact, c.exact);
    EXPECT_EQ(r.zeros, c.zeros);
    EXPECT_EQ(r.n, static_cast<int>(c.d.size()) - c.zeros);
    EXPECT_DOUBLE_EQ(r.statistic, c.statistic);
    EXPECT_NEAR(r.p_value, c.p, 1e-12 + 1e-9 * c.p);
    // Swapping A and B flips every sign: the same two-sided test.
    std::vector<double> flipped = c.d;
    for (double& x : flipped) x = -x;
    EXPECT_NEAR(WilcoxonSignedRankTest(flipped).p_value, r.p_value, 1e-15);
  }
}

TEST(PairedTestsTest, WilcoxonEdgeCases) {
  EXPECT_TRUE(std::isnan(WilcoxonSignedRankTest({}).p_value));
  const PairedTestResult zeros = WilcoxonSignedRankTest({0, 0, 0});
  EXPECT_EQ(zeros.n, 0);
  EXPECT_EQ(zeros.zeros, 3);
  EXPECT_TRUE(std::isnan(zeros.p_value));
  // Five positive differences: W- = 0, exact p = 2 / 2^5 = 0.0625 (hand-worked: only the empty
  // set of ranks sums to 0).
  const PairedTestResult five = WilcoxonSignedRankTest({0.1, 0.2, 0.3, 0.4, 0.5});
  EXPECT_TRUE(five.exact);
  EXPECT_DOUBLE_EQ(five.statistic, 0);
  EXPECT_DOUBLE_EQ(five.p_value, 0.0625);
}

constexpr char kHeader[] = "image,true_lat,true_lon,quality,method,error_m,radius95_m,reason\n";

// Rows of a fixes.csv with the columns above: image, quality, error, radius95 ("" for none).
std::string Csv(const std::vector<std::vector<std::string>>& rows) {
  std::string out = kHeader;
  for (const auto& r : rows)
    out += r[0] + ",44.0,-40.0," + r[1] + ",points," + r[2] + "," + r[3] + ",\n";
  return out;
}

TEST(PairedRunsTest, ParsesAndRefusesBadFiles) {
  Result<std::vector<FixesRow>> rows =
      ParseFixesCsv(Csv({{"a.jpg", "refined", "0.0100", "0.0500"}, {"b.jpg", "none", "", ""}}));
  ASSERT_TRUE(rows.ok()) << rows.status().ToString();
  ASSERT_EQ(rows->size(), 2u);
  EXPECT_EQ((*rows)[0].image, "a.jpg");
  EXPECT_DOUBLE_EQ(*(*rows)[0].error_m, 0.01);
  EXPECT_FALSE((*rows)[1].error_m.has_value());
  EXPECT_EQ((*rows)[1].line, 3);
  const std::pair<std::string, std::string> bad[] = {
      {"", "empty"},
      {"image,true_lat,true_lon,quality,error_m\n", "no column 'radius95_m'"},
      {std::string(kHeader) + "a.jpg,44,-40,refined,points,0.1\n", "line 2: 6 cells"},
      {Csv({{"a.jpg", "refined", "0.1", "1"}, {"a.jpg", "none", "", ""}}), "already on line 2"},
      {Csv({{"a.jpg", "refined", "0.1x", "1"}}), "not a distance"},
      {Csv({{"a.jpg", "refined", "-1", "1"}}), "not a distance"},
      {Csv({{"a.jpg", "refined", "nan", "1"}}), "not a distance"},
      {Csv({{"", "refined", "0.1", "1"}}), "empty image"},
  };
  for (const auto& [text, message] : bad) {
    const Result<std::vector<FixesRow>> r = ParseFixesCsv(text);
    ASSERT_FALSE(r.ok()) << text;
    EXPECT_NE(r.status().ToString().find(message), std::string::npos) << r.status().ToString();
  }
}

// Five queries, worked by hand. Refined: A yes B no on q3; A no B yes on q4 and q5. Within
// radius95 (error <= radius95; no fix is no): A covers q1, q2, q3; B covers q1, q4: A only q2,
// q3; B only q4. Refined in both: q1 (B - A = 0, dropped) and q2 (B - A = +0.2).
TEST(PairedRunsTest, PairsByImageAndCounts) {
  const auto a = ParseFixesCsv(Csv({{"q1", "refined", "0.1", "0.5"},
                                    {"q2", "refined", "0.1", "0.5"},
                                    {"q3", "refined", "0.2", "0.5"},
                                    {"q4", "coarse", "9", "5"},
                                    {"q5", "none", "", ""}}));
  // B lists its rows in another order: pairing is by image, not by line.
  const auto b = ParseFixesCsv(Csv({{"q5", "refined", "0.3", "0.2"},
                                    {"q4", "refined", "0.1", "0.5"},
                                    {"q3", "coarse", "7", "5"},
                                    {"q2", "refined", "0.3", "0.2"},
                                    {"q1", "refined", "0.1", "0.5"}}));
  ASSERT_TRUE(a.ok() && b.ok());
  const Result<PairedComparison> c = ComparePairedRuns(*a, *b);
  ASSERT_TRUE(c.ok()) << c.status().ToString();
  EXPECT_EQ(c->pairs, 5);
  EXPECT_EQ(c->refined_a_only, 1);
  EXPECT_EQ(c->refined_b_only, 2);
  EXPECT_EQ(c->covered_a_only, 2);
  EXPECT_EQ(c->covered_b_only, 1);
  EXPECT_EQ(c->refined_both, 2);
  EXPECT_EQ(c->error.zeros, 1);
  EXPECT_EQ(c->error.n, 1);
  // A zero was dropped, so the normal approximation (as scipy's default): n 1, T = 0, mean 1/2,
  // sd sqrt(1 x 2 x 3 / 24) = 1/2, z = -1, p = 2 (1 - Phi(1)) = 0.31731050786291415 (normal
  // table). McNemar 1 vs 2: exact, 2 P(X <= 1) of Binomial(3, 1/2) = 2 x 4/8 = 1.
  EXPECT_FALSE(c->error.exact);
  EXPECT_NEAR(c->error.z, -1, 1e-12);
  EXPECT_NEAR(c->error.p_value, 0.31731050786291415, 1e-12);
  EXPECT_DOUBLE_EQ(c->refined.p_value, 1);
  const std::string text = PairedComparisonText(*c);
  EXPECT_NE(text.find("refined: A only 1, B only 2; McNemar n 3, statistic 1, p 1 (exact "
                      "binomial): not significant at 0.05"),
            std::string::npos)
      << text;
  // Nearest-rank median of 0 and 0.2: the 1st.
  EXPECT_NE(text.find("median B - A +0.0000 m"), std::string::npos) << text;
}

TEST(PairedRunsTest, SignificantShiftAndRefusals) {
  // 30 queries refined in both, B 0.01 i + 0.005 m worse on each: all 30 differences positive and
  // distinct, exact p = 2 / 2^30 = 1.862645149230957e-09 (hand-worked: only W- = 0 is as extreme).
  std::vector<std::vector<std::string>> ra, rb;
  for (int i = 0; i < 30; ++i) {
    const std::string name = "q" + std::to_string(i);
    ra.push_back({name, "refined", "0.1000", "0.5000"});
    char worse[32];
    std::snprintf(worse, sizeof(worse), "%.4f", 0.1 + 0.01 * i + 0.005);
    rb.push_back({name, "refined", worse, "0.5000"});
  }
  const auto a = ParseFixesCsv(Csv(ra)), b = ParseFixesCsv(Csv(rb));
  ASSERT_TRUE(a.ok() && b.ok());
  const Result<PairedComparison> c = ComparePairedRuns(*a, *b);
  ASSERT_TRUE(c.ok());
  EXPECT_NEAR(c->error.p_value, 1.862645149230957e-09, 1e-20);
  EXPECT_NE(PairedComparisonText(*c).find("(exact): significant at 0.05"), std::string::npos);
  // A query in one run only, and a query whose truth differs: refused, naming the image.
  std::vector<FixesRow> fewer = *b;
  fewer.pop_back();
  const Result<PairedComparison> missing = ComparePairedRuns(*a, fewer);
  ASSERT_FALSE(missing.ok());
  EXPECT_NE(missing.status().ToString().find("q29 is in A only"), std::string::npos);
  EXPECT_NE(ComparePairedRuns(fewer, *a).status().ToString().find("q29 is in B only"),
            std::string::npos);
  std::vector<FixesRow> moved = *b;
  moved[3].true_lat = "44.0001";
  EXPECT_NE(ComparePairedRuns(*a, moved).status().ToString().find("the truth of q3 differs"),
            std::string::npos);
}

}  // namespace
}  // namespace sightfix
