#include "indexer/map/map_lock.h"

#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <string>

namespace sightfix {

Result<MapWriterLock> MapWriterLock::Acquire(const std::string& map_dir) {
  const std::string path = (std::filesystem::path(map_dir) / ".writer.lock").string();
  const int fd = ::open(path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
  if (fd < 0) return Status::IoError("cannot open " + path + ": " + std::strerror(errno));
  if (::flock(fd, LOCK_EX | LOCK_NB) != 0) {
    const int err = errno;
    char holder[256] = {};
    const ssize_t n = ::pread(fd, holder, sizeof(holder) - 1, 0);
    ::close(fd);
    if (err != EWOULDBLOCK)
      return Status::IoError("cannot lock " + path + ": " + std::strerror(err));
    std::string who(holder, n > 0 ? static_cast<size_t>(n) : 0);
    while (!who.empty() && (who.back() == '\n' || who.back() == ' ')) who.pop_back();
    return Status(StatusCode::kFailedPrecondition,
                  map_dir + " is being written by another process (" +
                      (who.empty() ? std::string("holder unknown") : who) +
                      "); wait for it to finish, then run again");
  }
  char line[128];
  const std::time_t now = std::time(nullptr);
  std::tm utc{};
  gmtime_r(&now, &utc);
  char when[32];
  std::strftime(when, sizeof(when), "%Y-%m-%dT%H:%M:%SZ", &utc);
  const int len =
      std::snprintf(line, sizeof(line), "pid %d since %s\n", static_cast<int>(::getpid()), when);
  if (::ftruncate(fd, 0) == 0 && len > 0) {
    const ssize_t w = ::pwrite(fd, line, static_cast<size_t>(len), 0);
    (void)w;  // the note is informative; the lock is what counts
  }
  return MapWriterLock(fd);
}

MapWriterLock::MapWriterLock(MapWriterLock&& other) noexcept : fd_(other.fd_) { other.fd_ = -1; }

MapWriterLock::~MapWriterLock() {
  if (fd_ >= 0) ::close(fd_);  // closing the last descriptor drops the flock
}

}  // namespace sightfix
