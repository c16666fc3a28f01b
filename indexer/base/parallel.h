// Work spread over threads of our own (DEVELOPERS.md, Threads): library pools stay pinned to one.
#pragma once

#include <algorithm>
#include <atomic>
#include <opencv2/core.hpp>
#include <thread>
#include <vector>

#include "indexer/base/threads.h"

namespace sightfix {

// `jobs` if positive, else the number of cores.
inline int ThreadCount(int jobs) {
  return jobs > 0 ? jobs : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
}

// OpenCV 4.6 makes its matrix-expression singletons (MatOp_Initializer) on first use with
// double-checked locking on a plain volatile pointer: two threads using `a + b` for the first
// time at once can call through a half-made object. ThreadSanitizer reported it in VladRows and
// a CI run saw the indexer crash with SIGSEGV there. One expression on the calling thread,
// before any worker starts, makes them (function-local static: made once, thread-safe).
inline void MakeOpenCvExpressionSingletons() {
  static const bool made = [] {
    const cv::Mat a = cv::Mat::ones(2, 2, CV_32F);
    const cv::Mat b = (a + a - a) * 2.0 / 2.0;
    return !b.empty();
  }();
  (void)made;
}

// Runs fn(i) for every i in [0, n) on `threads` threads (library pools pinned in each); returns
// when all are done. Each i runs
// exactly once; the order across threads is unspecified, so fn must write only to slot i.
template <typename Fn>
void ParallelFor(int n, int threads, Fn fn) {
  MakeOpenCvExpressionSingletons();
  std::atomic<int> next{0};
  std::vector<std::thread> pool;
  for (int t = 0; t < std::min(threads, n); ++t)
    pool.emplace_back([&] {
      PinLibraryThreads();
      for (int i; (i = next++) < n;) fn(i);
    });
  for (std::thread& th : pool) th.join();
}

}  // namespace sightfix
