// Protection-level evidence of a replayed drive (ProtectionEvidence, route_eval.h): how often the
// fixes' integrity flag (localizer.h FixIntegrity) held, was available, and raised false alerts.
//
// A fix is *protected* when it is refined and states protection levels, and *flagged usable*
// when its state is usable at the alert limits it was judged at. Then, as satellite-navigation
// integrity names them (common practice):
//  - misleading: flagged usable, and its error exceeds a protection level (horizontal error
//    over the horizontal level, or the cross- or along-track error over the lateral or
//    longitudinal level; the truth's heading sets those axes);
//  - hazardous: misleading and beyond the horizontal alert limit as well;
//  - available at an alert limit L: protected, no fault detected, no rival place, and its
//    horizontal protection level within L (counted over every query that ran). The place
//    checks (look-alikes, nearby survey images) run only for fixes usable at the limit they
//    were judged at, so above the narrowest such limit (checked_at_m) it is an upper bound;
//  - false alert: a fix within all its levels whose state says a fault or a rival place;
//  - time to alert: for a fix each image, the longest run (seconds, first to last timestamp) of
//    consecutive misleading fixes, the longest time a fault went unflagged.
// Independent trials, as for integrity.h: street segments holding a flagged-usable fix; the
// one-sided Clopper-Pearson 95 % bound over them answers "at most what share of 50 m stretches
// holds a misleading fix". Such evidence validates a protection level to about 1e-3, not to the
// far tails a safety case needs; sightfix is a fallback aid, not a certified navigation source.
// Pure functions; thread-compatible.
#pragma once

#include <optional>
#include <string>

#include "client/eval/route_eval.h"
#include "client/eval/street_segments.h"

namespace sightfix {

bool IsProtected(const QueryResult& q);
bool IsFlaggedUsable(const QueryResult& q);
bool IsMisleadingAtLevels(const QueryResult& q);  // REQUIRES: nothing; false unless flagged

// REQUIRES: cut was made from results.
ProtectionEvidence CountProtection(const std::vector<QueryResult>& results, const StreetCut& cut);

// Two lines for text outputs: the flag's counts, then availability by alert limit.
std::string ProtectionLines(const ProtectionEvidence& e);

// A drive folder's name, as fit-integrity records it: the last component of the path.
std::string DriveFolderName(const std::string& dir);
// Whether the drive in drive_dir is another than the one the fixes' overbound was fitted on
// (by folder name); nullopt when no overbound was fitted.
std::optional<bool> OverboundHeldOut(const ProtectionEvidence& e, const std::string& drive_dir);
// One line: the overbound the fixes carried, its drive, and whether this drive is held out.
std::string OverboundLine(const ProtectionEvidence& e, const std::string& drive_dir);

}  // namespace sightfix
