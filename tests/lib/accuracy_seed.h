// The demo town seed of the accuracy tests (engine_accuracy_test, realistic_accuracy_test):
// SIGHTFIX_ACCURACY_SEED, 41 when unset (CI's). Another seed checks that a test's regression
// bounds were not fitted to seed 41's draws.
#pragma once

#include <cstdlib>

namespace sightfix {

inline int AccuracyTownSeed() {
  const char* s = std::getenv("SIGHTFIX_ACCURACY_SEED");
  return s != nullptr && *s != '\0' ? std::atoi(s) : 41;
}

}  // namespace sightfix
