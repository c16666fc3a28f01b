#include "indexer/base/crash_report.h"

#include <execinfo.h>
#include <signal.h>
#include <unistd.h>

#include <cstring>
#include <initializer_list>

namespace sightfix {
#ifndef SIGHTFIX_SANITIZED
namespace {

const char* g_program = "sightfix";
alignas(16) char g_alt_stack[64 * 1024];  // the main thread's overflowed stack cannot run us

const char* SignalName(int sig) {
  switch (sig) {
    case SIGSEGV:
      return "SIGSEGV";
    case SIGBUS:
      return "SIGBUS";
    case SIGFPE:
      return "SIGFPE";
    case SIGILL:
      return "SIGILL";
    case SIGABRT:
      return "SIGABRT";
    default:
      return "?";
  }
}

// Async-signal-safe pieces only: write(2), backtrace_symbols_fd (libgcc loaded beforehand).
void Write(const char* s) {
  for (size_t n = std::strlen(s); n > 0;) {
    const ssize_t w = ::write(STDERR_FILENO, s, n);
    if (w <= 0) return;
    s += w;
    n -= static_cast<size_t>(w);
  }
}

void OnFatalSignal(int sig) {
  char number[12];
  int i = sizeof(number) - 1;
  number[i] = '\0';
  for (int v = sig; v > 0 || i == static_cast<int>(sizeof(number)) - 1; v /= 10)
    number[--i] = static_cast<char>('0' + v % 10);
  Write("\n");
  Write(g_program);
  Write(": fatal signal ");
  Write(number + i);
  Write(" (");
  Write(SignalName(sig));
  Write("); stack of the thread that died:\n");
  void* frames[64];
  const int n = backtrace(frames, 64);
  backtrace_symbols_fd(frames, n, STDERR_FILENO);
  Write("(a frame shown as BINARY(+OFFSET): addr2line -f -C -e BINARY OFFSET names it)\n");
  // SA_RESETHAND restored the default action: raise it (exit status, core dump as without us).
  raise(sig);
}

}  // namespace
#endif

void InstallCrashReport(const char* program) {
#ifndef SIGHTFIX_SANITIZED
  g_program = program;
  void* warm[1];
  backtrace(warm, 1);  // loads libgcc's unwinder now, not inside the handler
  stack_t ss{};
  ss.ss_sp = g_alt_stack;
  ss.ss_size = sizeof(g_alt_stack);
  sigaltstack(&ss, nullptr);
  struct sigaction sa {};
  sa.sa_handler = OnFatalSignal;
  sa.sa_flags = SA_ONSTACK | SA_RESETHAND;
  sigemptyset(&sa.sa_mask);
  for (int sig : {SIGSEGV, SIGBUS, SIGFPE, SIGILL, SIGABRT}) sigaction(sig, &sa, nullptr);
#else
  (void)program;
#endif
}

}  // namespace sightfix
