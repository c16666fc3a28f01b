// main() of every test executable: GoogleTest's, plus the crash report
// (indexer/base/crash_report.h), so a test that dies of a signal once in CI leaves the stack that
// died in the log.
#include <gtest/gtest.h>

#include "indexer/base/crash_report.h"

int main(int argc, char** argv) {
  sightfix::InstallCrashReport(argc > 0 ? argv[0] : "test");
  ::testing::InitGoogleTest(&argc, argv);
  return RUN_ALL_TESTS();
}
