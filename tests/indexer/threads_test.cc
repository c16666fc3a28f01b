// PinLibraryThreads is called by every worker thread and every Locate call, from many threads at
// once. OpenCV 4.6's cv::setNumThreads (TBB build, as Debian ships it) terminates and
// re-initialises one global tbb::task_arena without a lock (OpenCV modules/core/src/parallel.cpp),
// so calling it from four threads at once crashed a test process every time here (5 of 5 runs,
// SIGSEGV); a service test died that way once in CI. PinLibraryThreads must survive it.
#include "indexer/base/threads.h"

#include <gtest/gtest.h>
#include <omp.h>

#include <atomic>
#include <opencv2/core.hpp>
#include <opencv2/core/utility.hpp>
#include <opencv2/imgproc.hpp>
#include <thread>
#include <vector>

#include "indexer/base/parallel.h"

namespace sightfix {
namespace {

TEST(PinLibraryThreads, SafeFromManyThreadsAtOnce) {
  std::atomic<int> go{0};
  std::vector<std::thread> threads;
  std::atomic<int> pinned_ok{0};
  for (int t = 0; t < 4; ++t)
    threads.emplace_back([&] {
      ++go;
      while (go.load() < 4) std::this_thread::yield();  // start together
      bool ok = true;
      for (int i = 0; i < 20000; ++i) {
        PinLibraryThreads();
        ok &= omp_get_max_threads() == 1;
      }
      pinned_ok += ok;
    });
  for (std::thread& t : threads) t.join();
  EXPECT_EQ(pinned_ok.load(), 4);  // OpenMP's count is per thread: every thread pinned
  EXPECT_EQ(cv::getNumThreads(), 1);
}

TEST(PinLibraryThreads, OpenCvWorkStillRunsOnPinnedWorkers) {
  // The pinned pool still does OpenCV work on our own threads (serially inside each call).
  std::vector<double> sums(8, 0);
  ParallelFor(8, 4, [&](int i) {
    cv::Mat m(200, 200, CV_32F, cv::Scalar(i));
    cv::Mat blurred;
    cv::GaussianBlur(m, blurred, cv::Size(5, 5), 1.0);
    sums[i] = cv::sum(blurred)[0];
  });
  for (int i = 0; i < 8; ++i) EXPECT_NEAR(sums[i], 200.0 * 200.0 * i, 1e-3 * (1 + i) * 4e4);
}

}  // namespace
}  // namespace sightfix
