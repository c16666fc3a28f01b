#include "indexer/threads.h"

#include <dlfcn.h>
#include <omp.h>

#include <opencv2/core/utility.hpp>

namespace sightfix {

void PinLibraryThreads() {
  cv::setNumThreads(1);
  omp_set_num_threads(1);
  // Looked up at run time: Debian's BLAS alternative may be the reference BLAS, which has no
  // thread pool and no such symbol.
  using SetThreads = void (*)(int);
  static const auto openblas =
      reinterpret_cast<SetThreads>(dlsym(RTLD_DEFAULT, "openblas_set_num_threads"));
  if (openblas) openblas(1);
}

}  // namespace sightfix
