// One writer per map. build, add, retrain (and the client's fit-integrity) hold an exclusive flock(2) on MAPDIR/.writer.lock
// for their whole run; a second writer is refused at once with the holder named (its pid and
// start time, which the holder writes into the file). The kernel drops the lock when the holder
// ends, however it ends, so a killed writer never leaves the map locked. Readers (the server,
// inspect, verify) take no lock: they see the catalog before or after the writer's one atomic
// rename (DEVELOPERS.md, "Indexer: inputs, growth and safety on disk").
#pragma once

#include <string>

#include "indexer/base/status.h"

namespace sightfix {

class MapWriterLock {
 public:
  // kFailedPrecondition naming the holder when another process writes the map; kIoError when
  // the lock file cannot be made (no such folder, read-only folder).
  static Result<MapWriterLock> Acquire(const std::string& map_dir);
  MapWriterLock(MapWriterLock&& other) noexcept;
  MapWriterLock& operator=(MapWriterLock&&) = delete;
  MapWriterLock(const MapWriterLock&) = delete;
  ~MapWriterLock();

 private:
  explicit MapWriterLock(int fd) : fd_(fd) {}
  int fd_ = -1;
};

}  // namespace sightfix
