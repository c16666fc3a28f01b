// The overbound of a replayed drive's fix errors as the map records it (catalog.h IntegrityFit):
// fitted from the drive's results (overbound.h), then written into the map's catalog, where the
// engine applies it to every protection level. `sightfix fit-integrity` and the realistic-world
// test share these. Thread-compatible.
#pragma once

#include <string>
#include <vector>

#include "client/eval/overbound.h"
#include "client/eval/route_eval.h"
#include "indexer/base/status.h"
#include "indexer/map/catalog.h"

namespace sightfix {

// Fewer refined fixes within wrong_m than this cannot bound a tail: 20 fixes give 40 samples,
// whose largest alone has a one-sided 95 % Clopper-Pearson upper bound of 0.072 on its share.
inline constexpr int kMinOverboundFixes = 20;

struct DriveOverboundOptions {
  double wrong_m = 5;        // a refined fix farther off is a fault, left out (NormaliseErrors)
  double confidence = 0.95;  // of the Clopper-Pearson bound on the tail
  int map_version = 0;       // the map the drive ran on
};

struct DriveOverbound {
  IntegrityFit fit;
  NormalisedErrors errors;
};

// Fits K on a drive's results. drive_dir names the drive (its folder's name) and holds its
// drive.csv (hashed into the record). kFailedPrecondition with fewer than kMinOverboundFixes
// refined fixes within wrong_m; drive.csv's read errors as they come.
Result<DriveOverbound> FitDriveOverbound(const std::vector<QueryResult>& results,
                                         const std::string& drive_dir,
                                         const DriveOverboundOptions& o);

// Writes the fit into MAPDIR/catalog.sqlite (replacing any earlier one; the rest of the catalog
// as it was). The caller holds the map's writer lock (map_lock.h).
Status RecordOverbound(const std::string& map_dir, const IntegrityFit& fit);

}  // namespace sightfix
