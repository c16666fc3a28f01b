// Pins the thread pools of OpenCV, OpenMP (FAISS) and OpenBLAS to one thread for the calling
// thread: sightfix parallelises across images and requests itself (DEVELOPERS.md, Threads; PQ
// training measured 11 s pinned against 49-70 s with the pools fighting on 2 cores).
// OpenMP's thread count is a per-thread setting, so every worker thread calls this once.
#pragma once

namespace sightfix {

void PinLibraryThreads();

}  // namespace sightfix
