// libFuzzer target: fixes.csv as `sightfix compare` reads it for the paired tests. Invariants:
// every row returned has a non-empty image name, unique in the file, distances finite and
// non-negative, line numbers increasing from 2; a file paired with itself pairs every row with
// no discordant pair and all error differences zero.
#include <cmath>
#include <set>
#include <string>

#include "client/eval/paired_runs.h"
#include "tests/fuzz/fuzz_input.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace sightfix;
  const std::string text(reinterpret_cast<const char*>(data), size);
  const Result<std::vector<FixesRow>> rows = ParseFixesCsv(text);
  if (!rows.ok()) return 0;
  std::set<std::string> images;
  int last_line = 1;
  for (const FixesRow& r : *rows) {
    FUZZ_CHECK(!r.image.empty() && images.insert(r.image).second);
    FUZZ_CHECK(r.line > last_line);
    last_line = r.line;
    for (const std::optional<double>& v : {r.error_m, r.radius95_m})
      FUZZ_CHECK(!v || (std::isfinite(*v) && *v >= 0));
  }
  const Result<PairedComparison> self = ComparePairedRuns(*rows, *rows);
  FUZZ_CHECK(self.ok());
  FUZZ_CHECK(self->pairs == static_cast<int>(rows->size()));
  FUZZ_CHECK(self->refined.n == 0 && self->within_radius95.n == 0 && self->error.n == 0);
  return 0;
}
