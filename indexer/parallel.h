// Work spread over threads of our own (DEVELOPERS.md, Threads): library pools stay pinned to one.
#pragma once

#include <algorithm>
#include <atomic>
#include <thread>
#include <vector>

#include "indexer/threads.h"

namespace sightfix {

// `jobs` if positive, else the number of cores.
inline int ThreadCount(int jobs) {
  return jobs > 0 ? jobs : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
}

// Runs fn(i) for every i in [0, n) on `threads` threads (library pools pinned in each); returns
// when all are done. Each i runs
// exactly once; the order across threads is unspecified, so fn must write only to slot i.
template <typename Fn>
void ParallelFor(int n, int threads, Fn fn) {
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
