// Pins the thread pools of OpenCV, OpenMP (FAISS) and OpenBLAS to one thread: sightfix
// parallelises across images and requests itself (DEVELOPERS.md, Threads; PQ training measured
// 11 s pinned against 49-70 s with the pools fighting on 2 cores). OpenCV's and OpenBLAS's counts
// are process-wide and set once (OpenCV's setter is not safe to call from two threads at once);
// OpenMP's is per thread, so every worker thread calls this. Safe from any number of threads.
#pragma once

namespace sightfix {

void PinLibraryThreads();

}  // namespace sightfix
