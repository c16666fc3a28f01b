// The evidence for another place (server/engine/place_ambiguity.h) from candidates checked but
// short of verification, worked by hand: the look-alike case of DEVELOPERS.md "Integrity", where
// the true place verifies just under the threshold while its twin passes.
#include <gtest/gtest.h>

#include "indexer/base/geo.h"
#include "server/engine/place_ambiguity.h"

namespace sightfix {
namespace {

ReferenceUse Candidate(double north_m, bool checked, bool verified, int inliers) {
  ReferenceUse u;
  const GeodesicDirect p = GeodesicFrom(44.0, -40.0, 0, north_m);
  u.lat_deg = p.lat_deg, u.lon_deg = p.lon_deg;
  u.checked = checked, u.verified = verified, u.inliers = inliers;
  return u;
}

TEST(PlaceEvidenceTest, NearMissesAtDistinctPlacesCountForTheFlagOnly) {
  const std::vector<ReferenceUse> uses = {
      Candidate(2, true, true, 37),     // the fix's own reference: verified, not a near miss
      Candidate(142, false, false, 0),  // ranked, never checked
      Candidate(142, true, false, 18),  // the true place, 18 inliers: the near miss
      Candidate(10, true, false, 30),   // at the fix's own place (10 m): not a rival
      Candidate(200, true, false, 8),   // too few inliers to speak for anything
  };
  PlaceEvidence e;
  e.here = 37;
  WeighNearMisses(uses, 44.0, -40.0, 30, 12, &e);
  EXPECT_EQ(e.near_miss, 18);
  EXPECT_NEAR(e.near_miss_m, 142, 0.5);
  EXPECT_FALSE(e.RivalReaches(0.25));    // withholding weighs verified rivals only
  EXPECT_TRUE(e.AnyRivalReaches(0.25));  // 18 >= 0.25 x 37: not usable
  EXPECT_FALSE(e.AnyRivalReaches(0.5));
  EXPECT_NE(e.DescribeAny().find("142 m away checked with 18 inliers"), std::string::npos)
      << e.DescribeAny();
  PlaceEvidence none;
  none.here = 37;
  WeighNearMisses(uses, 44.0, -40.0, 30, 20, &none);  // a floor above 18
  EXPECT_EQ(none.near_miss, 0);
  EXPECT_FALSE(none.AnyRivalReaches(0.25));
}

}  // namespace
}  // namespace sightfix
