// Rival candidates (place_ambiguity.h WithRivalCandidates): the first top_k of a retrieval
// ranking are kept as they are, then up to `rivals` more, in rank order, that lie farther than
// distinct_m from every kept one. Positions are built along a meridian, where one degree of
// latitude is 111 km (WGS84 near 44 deg N: 111.1 km per degree, GeographicLib; from memory), so
// 3e-4 deg is about 33 m, beyond a 30 m distinct place.
#include <gtest/gtest.h>

#include <vector>

#include "indexer/base/geo.h"
#include "server/engine/place_ambiguity.h"

namespace sightfix {
namespace {

GeoPoint At(double north_m) { return {44.0 + north_m / 111100.0, -40.0, 0}; }

TEST(RivalCandidatesTest, KeepsTopKThenTheFirstDistinctPlaces) {
  // Ranks 0-3 at place A (0-6 m), rank 4 at A too, ranks 5 and 6 at B (150 m), rank 7 at C.
  const std::vector<GeoPoint> ranked = {At(0), At(2),   At(4),   At(6),
                                        At(8), At(150), At(152), At(400)};
  EXPECT_EQ(WithRivalCandidates(ranked, 4, 2, 30), (std::vector<size_t>{0, 1, 2, 3, 5, 6}));
  EXPECT_EQ(WithRivalCandidates(ranked, 4, 1, 30), (std::vector<size_t>{0, 1, 2, 3, 5}));
  EXPECT_EQ(WithRivalCandidates(ranked, 4, 3, 30), (std::vector<size_t>{0, 1, 2, 3, 5, 6, 7}));
  // Off: the top_k alone, as retrieval ranked them.
  EXPECT_EQ(WithRivalCandidates(ranked, 4, 0, 30), (std::vector<size_t>{0, 1, 2, 3}));
}

TEST(RivalCandidatesTest, APlaceAlreadyInTheTopKIsNoRival) {
  // B (150 m) is represented at rank 1, so its rank-5 view is not added; C (400 m) is.
  const std::vector<GeoPoint> ranked = {At(0), At(150), At(2), At(4), At(6), At(155), At(400)};
  EXPECT_EQ(WithRivalCandidates(ranked, 5, 2, 30), (std::vector<size_t>{0, 1, 2, 3, 4, 6}));
  // Within distinct_m of a kept one is the same place: 25 m from rank 4 at 6 m.
  const std::vector<GeoPoint> near = {At(0), At(6), At(31), At(40)};
  EXPECT_EQ(WithRivalCandidates(near, 2, 2, 30), (std::vector<size_t>{0, 1, 3}));
}

TEST(RivalCandidatesTest, ShortRankings) {
  EXPECT_TRUE(WithRivalCandidates(std::vector<GeoPoint>{}, 8, 2, 30).empty());
  EXPECT_EQ(WithRivalCandidates(std::vector<GeoPoint>{At(0), At(500)}, 8, 2, 30),
            (std::vector<size_t>{0, 1}));
}

}  // namespace
}  // namespace sightfix
