#include "client/eval/overbound_record.h"

#include "client/eval/protection_evidence.h"
#include "client/eval/route_view.h"
#include "indexer/base/env.h"
#include "indexer/base/iso_time.h"
#include "indexer/base/sha256.h"

namespace sightfix {

Result<DriveOverbound> FitDriveOverbound(const std::vector<QueryResult>& results,
                                         const std::string& drive_dir,
                                         const DriveOverboundOptions& o) {
  DriveOverbound out;
  out.errors = NormaliseErrors(results, o.wrong_m);
  const int usable = out.errors.fixes - out.errors.excluded - out.errors.faults;
  if (usable < kMinOverboundFixes) {
    // Queries that failed outright (an image missing or unreadable, a refused call) say more
    // than "a longer drive": name how many and the first reason.
    size_t failed = 0;
    const QueryResult* first = nullptr;
    for (const QueryResult& r : results)
      if (!r.error.empty()) first = first ? first : &r, ++failed;
    const std::string why = failed == 0 ? " (a longer drive, or a map that covers it)"
                                        : "; " + std::to_string(failed) + " of " +
                                              std::to_string(results.size()) +
                                              " queries failed, the first: " + first->error;
    return Status{StatusCode::kFailedPrecondition,
                  "only " + std::to_string(usable) + " refined fixes within " +
                      FormatNumber("%g", o.wrong_m) +
                      " m of the truth and no group's fault: a fit needs at least " +
                      std::to_string(kMinOverboundFixes) + why};
  }
  Result<OverboundFit> k = FitOverbound(out.errors.z, o.confidence);
  if (!k.ok()) return k.status();
  Result<std::string> sha = Sha256OfFile(drive_dir + "/drive.csv");
  if (!sha.ok()) return sha.status();
  IntegrityFit& f = out.fit;
  f.overbound_scale = k->scale, f.binding_z = k->binding_z, f.confidence = o.confidence;
  if (out.errors.fault_scale > f.overbound_scale)  // a group's fault outgrew its levels
    f.overbound_scale = out.errors.fault_scale, f.binding_z = 0;
  f.faults = out.errors.faults;
  f.drive = DriveFolderName(drive_dir), f.drive_sha256 = *sha;
  f.fixes = usable, f.excluded = out.errors.excluded, f.map_version = o.map_version;
  f.fitted_utc = FormatIsoUtc(static_cast<double>(Env::Default()->NowUnixSeconds()));
  return out;
}

Status RecordOverbound(const std::string& map_dir, const IntegrityFit& fit) {
  const std::string path = map_dir + "/catalog.sqlite";
  Result<Catalog> catalog = ReadCatalog(path);
  if (!catalog.ok()) return catalog.status();
  catalog->integrity_fit = fit;
  return WriteCatalog(path, *catalog);
}

}  // namespace sightfix
