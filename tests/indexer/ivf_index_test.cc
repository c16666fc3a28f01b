// The map-wide IVF-PQ index (ivf_index.h): shards merged into on-disk lists give exactly the
// index one process would build; its answers against exact search (FAISS IndexFlatL2, the
// reference); errors name what is wrong.
#include "indexer/map/ivf_index.h"

#include <faiss/IndexFlat.h>
#include <gtest/gtest.h>

#include <filesystem>
#include <random>

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

class IvfIndexTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = fs::path(::testing::TempDir()) / ("ivf_" + std::to_string(::getpid()));
    fs::create_directories(dir_);
    x_ = Clustered(kN, 7);
    for (int i = 0; i < kN; ++i) ids_.push_back(1000000 + i);
    options_.nlist = 64;
    options_.pq_bytes = 8;
    options_.train_size = 10000;
    ASSERT_TRUE(TrainIvf(x_.data(), kN, kDims, options_, P("trained.index")).ok());
  }
  void TearDown() override { fs::remove_all(dir_); }
  std::string P(const std::string& name) const { return (dir_ / name).string(); }

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
  const std::vector<float> q = Clustered(200, 99);
  for (int nprobe : {1, 8}) {
    (*merged)->nprobe = (*one)->nprobe = nprobe;
    std::vector<float> d1(200 * 5), d2(200 * 5);
    std::vector<faiss::Index::idx_t> l1(200 * 5), l2(200 * 5);
    (*merged)->search(200, q.data(), 5, d1.data(), l1.data());
    (*one)->search(200, q.data(), 5, d2.data(), l2.data());
    // Same codes in each list, so the same neighbours (ties may swap order: compare as sets of
    // the top distance; a mismatch in any other place is a real difference).
    int same = 0;
    for (int i = 0; i < 200 * 5; ++i) same += l1[i] == l2[i] || d1[i] == d2[i];
    EXPECT_EQ(same, 200 * 5) << "nprobe " << nprobe;
  }
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
}

}  // namespace
}  // namespace sightfix
