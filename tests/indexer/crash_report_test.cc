// A fatal signal prints the program, the signal and a stack, then still ends the process by that
// signal (so CTest, shells and core dumps see what they would without the report).
#include "indexer/base/crash_report.h"

#include <gtest/gtest.h>
#include <signal.h>

#include <cstdint>

namespace sightfix {

volatile uintptr_t g_nowhere = 0;  // opaque to the optimiser: a real fault, not a known UB

// External linkage: the report names it (functions in anonymous namespaces print as +OFFSET).
[[gnu::noinline]] void CrashHereOnPurpose() {
  *reinterpret_cast<volatile int*>(g_nowhere) = 1;  // SIGSEGV
}

namespace {

TEST(CrashReport, NamesTheSignalAndTheStackThenDiesOfIt) {
#ifdef SIGHTFIX_SANITIZED
  GTEST_SKIP() << "sanitizer builds keep the sanitizer's own report";
#else
  GTEST_FLAG_SET(death_test_style, "threadsafe");
  EXPECT_EXIT(
      {
        InstallCrashReport("crash-report-test");
        CrashHereOnPurpose();
      },
      ::testing::KilledBySignal(SIGSEGV),
      "crash-report-test: fatal signal 11 \\(SIGSEGV\\); stack of the thread that died:\n"
      "(.|\n)*CrashHereOnPurpose");
  EXPECT_EXIT(
      {
        InstallCrashReport("crash-report-test");
        abort();
      },
      ::testing::KilledBySignal(SIGABRT), "fatal signal 6 \\(SIGABRT\\)");
#endif
}

}  // namespace
}  // namespace sightfix
