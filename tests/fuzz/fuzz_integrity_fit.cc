// libFuzzer target: the map catalog's integrity_fit record (indexer/map/catalog.h), JSON that
// the engine reads into every protection level's scale. Invariants: a record that parses has a
// finite scale >= 1 and non-negative counts, and writes back to a record that parses the same.
#include <cmath>
#include <string>

#include "indexer/map/catalog.h"
#include "tests/fuzz/fuzz_input.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace sightfix;
  const std::string text(reinterpret_cast<const char*>(data), size);
  Result<IntegrityFit> fit = ParseIntegrityFit(text, "catalog.sqlite");
  if (!fit.ok()) return 0;
  FUZZ_CHECK(std::isfinite(fit->overbound_scale) && fit->overbound_scale >= 1);
  FUZZ_CHECK(fit->fixes >= 0 && fit->excluded >= 0 && fit->map_version >= 0);
  Result<IntegrityFit> again = ParseIntegrityFit(IntegrityFitJson(*fit), "catalog.sqlite");
  FUZZ_CHECK(again.ok());
  FUZZ_CHECK(again->overbound_scale == fit->overbound_scale && again->drive == fit->drive);
  FUZZ_CHECK(again->fixes == fit->fixes && again->map_version == fit->map_version);
  return 0;
}
