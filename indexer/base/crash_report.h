// A fatal signal (SIGSEGV, SIGBUS, SIGFPE, SIGILL, SIGABRT) prints one line naming the program
// and the signal, then the stack of the thread that died, on stderr; the signal then takes its
// default course (exit status and core dump unchanged). Every sightfix program and test installs
// it first thing in main, so a crash seen once, on a machine nobody can log in to, still says
// where. Frames in our code print as NAME+OFFSET (executables export their symbols); resolve a
// bare +OFFSET with `addr2line -f -C -e BINARY OFFSET`. A no-op in sanitizer builds, whose own
// reports are better.
#pragma once

// Defined in AddressSanitizer and ThreadSanitizer builds (gcc and clang spell it differently).
#if defined(__SANITIZE_ADDRESS__) || defined(__SANITIZE_THREAD__)
#define SIGHTFIX_SANITIZED 1
#elif defined(__has_feature)
#if __has_feature(address_sanitizer) || __has_feature(thread_sanitizer)
#define SIGHTFIX_SANITIZED 1
#endif
#endif

namespace sightfix {

void InstallCrashReport(const char* program);

}  // namespace sightfix
