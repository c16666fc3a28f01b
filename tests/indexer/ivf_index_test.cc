// The map-wide IVF-PQ index (ivf_index.h): shards merged into on-disk lists give exactly the
// index one process would build; its answers against exact search (FAISS IndexFlatL2, the
// reference); the re-ranking searcher against brute force over the same vectors; errors name
// what is wrong.
#include "indexer/map/ivf_index.h"

#include <faiss/IndexFlat.h>
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <random>
#include <set>
#include <sstream>
#include <utility>

namespace sightfix {
namespace {

namespace fs = std::filesystem;
constexpr int kDims = 32;

// n vectors around 100 seeded centres (a clustered set, like place descriptors).
std::vector<float> Clustered(int n, uint32_t seed) {
  std::mt19937 rng(seed);
  std::normal_distribution<float> g(0, 1);
  std::vector<float> centres(100 * kDims);
  for (float& c : centres) c = g(rng);
  std::vector<float> x(static_cast<size_t>(n) * kDims);
  for (int i = 0; i < n; ++i) {
    const int c = static_cast<int>(rng() % 100);
    for (int d = 0; d < kDims; ++d) x[i * kDims + d] = centres[c * kDims + d] + 0.3f * g(rng);
  }
  return x;
}

// A reference answer: neighbours by rank, nearest first (squared L2).
struct Neighbours {
  std::vector<int64_t> ids;
  std::vector<double> distances;
};

// Whether the k answers (ids, distances) are the reference's k nearest: at each rank the
// reference's distance (within relative `tolerance`; 0: bit for bit) and an id the reference
// places at that distance. Neighbours at equal distances form a tie group whose ids may come in
// any order, so ids are compared as sets per tie group; the reference holds more than k
// neighbours, so a tie group cut at rank k is whole in it. An id given twice is a mismatch.
// Names the first mismatch in *why.
bool SameNeighbours(const int64_t* ids, const float* distances, int k, const Neighbours& ref,
                    double tolerance, std::string* why) {
  std::set<int64_t> seen;
  std::ostringstream out;
  for (int r = 0; r < k; ++r) {
    const double d = distances[r];
    auto tied = [&](double other) { return std::abs(other - d) <= tolerance * std::abs(d); };
    bool id_in_tie_group = false;
    for (size_t j = 0; j < ref.ids.size(); ++j)
      id_in_tie_group |= ref.ids[j] == ids[r] && tied(ref.distances[j]);
    if (r >= static_cast<int>(ref.ids.size()) || !tied(ref.distances[r]))
      out << "rank " << r << ": distance " << d << ", reference "
          << (r < static_cast<int>(ref.ids.size()) ? ref.distances[r] : -1.0);
    else if (!id_in_tie_group)
      out << "rank " << r << ": id " << ids[r] << " is not the reference's at distance " << d;
    else if (!seen.insert(ids[r]).second)
      out << "rank " << r << ": id " << ids[r] << " given twice";
    if (!out.str().empty()) {
      *why = out.str();
      return false;
    }
  }
  return true;
}

// The k nearest rows of x (n x kDims, row i known as ids[i]) to q by brute force, squared L2
// summed in double: the definition of k nearest neighbours, no index involved.
Neighbours BruteForce(const float* x, const int64_t* ids, int n, const float* q, int k) {
  std::vector<std::pair<double, int64_t>> all(n);
  for (int i = 0; i < n; ++i) {
    double sum = 0;
    for (int d = 0; d < kDims; ++d) {
      const double diff = double(q[d]) - x[static_cast<size_t>(i) * kDims + d];
      sum += diff * diff;
    }
    all[i] = {sum, ids[i]};
  }
  k = std::min(k, n);
  std::partial_sort(all.begin(), all.begin() + k, all.end());
  Neighbours out;
  for (int i = 0; i < k; ++i) {
    out.distances.push_back(all[i].first);
    out.ids.push_back(all[i].second);
  }
  return out;
}

class IvfIndexTest : public ::testing::Test {
 protected:
  // Training, the slow step, runs once for the suite; each test gets a folder of its own with a
  // copy of the trained index.
  static void SetUpTestSuite() {
    fs::create_directories(TrainedDir());
    const std::vector<float> x = Clustered(kN, 7);
    ASSERT_TRUE(TrainIvf(x.data(), kN, kDims, Options(), TrainedDir() + "/trained.index").ok());
  }
  static void TearDownTestSuite() { fs::remove_all(TrainedDir()); }
  void SetUp() override {
    dir_ = fs::path(::testing::TempDir()) / ("ivf_" + std::to_string(::getpid()));
    fs::create_directories(dir_);
    x_ = Clustered(kN, 7);
    for (int i = 0; i < kN; ++i) ids_.push_back(1000000 + i);
    options_ = Options();
    ASSERT_TRUE(fs::copy_file(TrainedDir() + "/trained.index", P("trained.index")));
  }
  void TearDown() override { fs::remove_all(dir_); }
  std::string P(const std::string& name) const { return (dir_ / name).string(); }
  static std::string TrainedDir() {
    return (fs::path(::testing::TempDir()) / ("ivf_trained_" + std::to_string(::getpid())))
        .string();
  }
  static IvfOptions Options() {
    IvfOptions o;
    o.nlist = 64;
    o.pq_bytes = 8;
    o.train_size = 10000;
    return o;
  }

  static constexpr int kN = 20000;
  fs::path dir_;
  std::vector<float> x_;
  std::vector<int64_t> ids_;
  IvfOptions options_;
};

TEST_F(IvfIndexTest, ShardsMergedOnDiskEqualOneIndex) {
  const int half = kN / 2;
  ASSERT_TRUE(AddIvfShard(P("trained.index"), x_.data(), ids_.data(), half, P("a.shard")).ok());
  ASSERT_TRUE(AddIvfShard(P("trained.index"), x_.data() + half * kDims, ids_.data() + half,
                          kN - half, P("b.shard"))
                  .ok());
  ASSERT_TRUE(AddIvfShard(P("trained.index"), x_.data(), ids_.data(), kN, P("all.shard")).ok());
  ASSERT_TRUE(MergeIvfShards(P("trained.index"), {P("b.shard"), P("a.shard")}, P("merged.index"),
                             P("merged.ivfdata"))
                  .ok());
  ASSERT_TRUE(
      MergeIvfShards(P("trained.index"), {P("all.shard")}, P("one.index"), P("one.ivfdata")).ok());
  auto merged = LoadIvf(P("merged.index"));
  auto one = LoadIvf(P("one.index"));
  ASSERT_TRUE(merged.ok()) << merged.status().ToString();
  ASSERT_TRUE(one.ok());
  EXPECT_EQ((*merged)->ntotal, kN);
  const int nq = 200, k = 5, ref_k = 20;
  const std::vector<float> q = Clustered(nq, 99);
  for (int nprobe : {1, 8}) {
    (*merged)->nprobe = (*one)->nprobe = nprobe;
    std::vector<float> d1(nq * k), d2(nq * ref_k);
    std::vector<faiss::Index::idx_t> l1(nq * k), l2(nq * ref_k);
    (*merged)->search(nq, q.data(), k, d1.data(), l1.data());
    (*one)->search(nq, q.data(), ref_k, d2.data(), l2.data());
    // Same codes in each list, so the same neighbours at bit-identical distances: ids and
    // distances must both agree at every rank (a tie group's ids in any order).
    int same = 0;
    std::string first_mismatch;
    for (int i = 0; i < nq; ++i) {
      Neighbours ref{{l2.begin() + i * ref_k, l2.begin() + (i + 1) * ref_k},
                     {d2.begin() + i * ref_k, d2.begin() + (i + 1) * ref_k}};
      std::string why;
      const bool ok = SameNeighbours(&l1[i * k], &d1[i * k], k, ref, 0.0, &why);
      same += ok;
      if (!ok && first_mismatch.empty()) first_mismatch = "query " + std::to_string(i) + ": " + why;
    }
    EXPECT_EQ(same, nq) << "nprobe " << nprobe << ", " << first_mismatch;
  }
}

// The searcher re-ranks from the merged .vec and .ids files: three shards with ids three apart
// (a row is found by its id, not its place), merged out of order. Probing every list and
// re-ranking every vector must give brute force's answer; any re-ranking depth must report each
// id's exact distance; no re-ranking must give the index's own PQ answer.
TEST_F(IvfIndexTest, SearcherReRanksToTheExactNeighbours) {
  constexpr int kShard = 1000, kSmall = 3 * kShard, k = 10;
  std::vector<int64_t> ids(kSmall);
  for (int i = 0; i < kSmall; ++i) ids[i] = 5000 + 3 * i;
  std::vector<std::string> shards;
  for (int s : {2, 0, 1}) {
    shards.push_back(P("s" + std::to_string(s) + ".shard"));
    ASSERT_TRUE(AddIvfShard(P("trained.index"), x_.data() + s * kShard * kDims,
                            ids.data() + s * kShard, kShard, shards.back())
                    .ok());
  }
  ASSERT_TRUE(
      MergeIvfShards(P("trained.index"), shards, P("small.index"), P("small.ivfdata")).ok());
  auto searcher = IvfSearcher::Open(P("small.index"));
  ASSERT_TRUE(searcher.ok()) << searcher.status().ToString();
  // Queries around stored vectors: half near duplicates, half a cluster's spread away.
  std::mt19937 rng(4321);
  const int nq = 100;
  std::vector<float> q(nq * kDims);
  for (int i = 0; i < nq; ++i) {
    std::normal_distribution<float> g(0, i % 2 ? 0.3f : 0.05f);
    const int j = static_cast<int>(rng() % kSmall);
    for (int d = 0; d < kDims; ++d) q[i * kDims + d] = x_[j * kDims + d] + g(rng);
  }
  // Float sums of 32 squares against double ones: relative error well under 1e-5 (32 roundings
  // of 2^-24 each, IEEE 754 single precision).
  const double tolerance = 1e-5;
  int exact = 0, exact_at_depth = 0, pq_same = 0;
  std::string first_mismatch;
  for (int i = 0; i < nq; ++i) {
    const float* qi = &q[i * kDims];
    std::vector<int64_t> got(k);
    std::vector<float> dist(k);
    std::string why;
    (*searcher)->Search(qi, k, options_.nlist, kSmall, got.data(), dist.data());
    const bool ok =
        SameNeighbours(got.data(), dist.data(), k,
                       BruteForce(x_.data(), ids.data(), kSmall, qi, k + 10), tolerance, &why);
    exact += ok;
    if (!ok && first_mismatch.empty()) first_mismatch = "query " + std::to_string(i) + ": " + why;
    // Re-ranking 50 candidates of 8 lists: whatever ids come back, each at its exact distance,
    // nearest first.
    (*searcher)->Search(qi, k, 8, 50, got.data(), dist.data());
    bool each_exact = std::is_sorted(dist.begin(), dist.end());
    for (int r = 0; r < k; ++r) {
      const auto row = std::lower_bound(ids.begin(), ids.end(), got[r]);
      each_exact &= row != ids.end() && *row == got[r];
      if (!each_exact) break;
      const Neighbours own = BruteForce(&x_[(row - ids.begin()) * kDims], &got[r], 1, qi, 1);
      each_exact &= std::abs(own.distances[0] - dist[r]) <= tolerance * own.distances[0];
    }
    exact_at_depth += each_exact;
    // No re-ranking (rerank <= k): the index's PQ answer as it is.
    std::vector<float> pq_dist(k);
    std::vector<faiss::Index::idx_t> pq_ids(k);
    faiss::IVFSearchParameters params;
    params.nprobe = 8;
    (*searcher)->index().search(1, qi, k, pq_dist.data(), pq_ids.data(), &params);
    (*searcher)->Search(qi, k, 8, 0, got.data(), dist.data());
    pq_same += got == std::vector<int64_t>(pq_ids.begin(), pq_ids.end()) && dist == pq_dist;
  }
  EXPECT_EQ(exact, nq) << first_mismatch;
  EXPECT_EQ(exact_at_depth, nq);
  EXPECT_EQ(pq_same, nq);
}

TEST_F(IvfIndexTest, FindsTheExactNeighbourWhenProbingEveryList) {
  ASSERT_TRUE(AddIvfShard(P("trained.index"), x_.data(), ids_.data(), kN, P("all.shard")).ok());
  ASSERT_TRUE(
      MergeIvfShards(P("trained.index"), {P("all.shard")}, P("m.index"), P("m.ivfdata")).ok());
  auto ivf = LoadIvf(P("m.index"));
  ASSERT_TRUE(ivf.ok());
  faiss::IndexFlatL2 exact(kDims);  // the reference
  exact.add(kN, x_.data());
  // Queries near stored vectors (a place seen again): each a stored vector plus noise a sixth
  // of the spread within a cluster.
  const int nq = 300;
  std::vector<float> q(nq * kDims);
  std::mt19937 rng(1234);
  std::normal_distribution<float> g(0, 0.05f);
  for (int i = 0; i < nq; ++i) {
    const int j = static_cast<int>(rng() % kN);
    for (int d = 0; d < kDims; ++d) q[i * kDims + d] = x_[j * kDims + d] + g(rng);
  }
  std::vector<float> de(nq);
  std::vector<faiss::Index::idx_t> le(nq);
  exact.search(nq, q.data(), 1, de.data(), le.data());
  (*ivf)->nprobe = options_.nlist;
  std::vector<float> d(nq * 10);
  std::vector<faiss::Index::idx_t> l(nq * 10);
  (*ivf)->search(nq, q.data(), 10, d.data(), l.data());
  int found = 0;
  for (int i = 0; i < nq; ++i)
    for (int k = 0; k < 10; ++k) found += l[i * 10 + k] == ids_[le[i]];
  // PQ with 8 bytes for 32 dimensions: the exact neighbour within the 10 best in >= 95 % of
  // queries (common practice for PQ re-ranking depth; FAISS IndexFlatL2 as the reference).
  EXPECT_GE(found, 0.95 * nq) << found << " of " << nq;
}

TEST_F(IvfIndexTest, ErrorsNameTheProblem) {
  Status s = MergeIvfShards(P("trained.index"), {P("missing.shard")}, P("x.index"), P("x.ivfdata"));
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message().find("missing.shard"), std::string::npos) << s.ToString();
  IvfOptions bad = options_;
  bad.pq_bytes = 7;
  EXPECT_FALSE(TrainIvf(x_.data(), kN, kDims, bad, P("bad.index")).ok());
  EXPECT_FALSE(LoadIvf(P("nothing.index")).ok());
  // Two shards sharing their boundary id: one image would be in the index twice.
  std::vector<int64_t> ids_b(ids_.begin() + 99, ids_.begin() + 199);
  ASSERT_TRUE(AddIvfShard(P("trained.index"), x_.data(), ids_.data(), 100, P("a.shard")).ok());
  ASSERT_TRUE(
      AddIvfShard(P("trained.index"), x_.data() + 100 * kDims, ids_b.data(), 100, P("b.shard"))
          .ok());
  s = MergeIvfShards(P("trained.index"), {P("a.shard"), P("b.shard")}, P("x.index"),
                     P("x.ivfdata"));
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message().find("b.shard overlaps the ids of"), std::string::npos) << s.ToString();
}

}  // namespace
}  // namespace sightfix
