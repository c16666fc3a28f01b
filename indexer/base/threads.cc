#include "indexer/base/threads.h"

#include <dlfcn.h>
#include <omp.h>

#include <mutex>
#include <opencv2/core/utility.hpp>

namespace sightfix {

void PinLibraryThreads() {
  // Process-wide settings, made once. OpenCV 4.6 built with TBB (Debian's) implements
  // cv::setNumThreads by terminating and re-initialising one global tbb::task_arena with no lock
  // (modules/core/src/parallel.cpp): two threads calling it at once crash the process
  // (threads_test hammers it; a service test died with SIGSEGV in CI that way). OpenBLAS's
  // thread count is process-wide too.
  static std::once_flag once;
  std::call_once(once, [] {
    cv::setNumThreads(1);
    // Looked up at run time: Debian's BLAS alternative may be the reference BLAS, which has no
    // thread pool and no such symbol.
    using SetThreads = void (*)(int);
    const auto openblas =
        reinterpret_cast<SetThreads>(dlsym(RTLD_DEFAULT, "openblas_set_num_threads"));
    if (openblas) openblas(1);
  });
  omp_set_num_threads(1);  // OpenMP's count is per thread: set on every call
}

}  // namespace sightfix
