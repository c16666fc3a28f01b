// Env: every operating-system call the map writers and the tile cache make, behind one
// interface (after LevelDB's Env): file creation and reading, fsync, rename, removal, directory
// listing and the clocks. Production code uses Env::Default(); tests wrap it (EnvWrapper) to
// inject faults: a process killed between two renames, a write that fails, a slow disk.
//
// Paths are plain strings, as the caller gives them. Every method returns a Status naming the
// path on failure (kIoError, or kNotFound for a missing file). Thread safety: Env::Default() is
// thread-safe and lives for the whole process; a wrapper is as thread-safe as what it adds.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix {

class Env {
 public:
  virtual ~Env() = default;

  // The process's real operating system. Never null; never deleted.
  static Env* Default();

  // Whole-file I/O. WriteFile creates or truncates PATH and writes DATA (no fsync).
  virtual Result<std::string> ReadFile(const std::string& path) = 0;
  virtual Status WriteFile(const std::string& path, const void* data, size_t size) = 0;
  // Makes PATH's contents durable (fsync(2)).
  virtual Status SyncFile(const std::string& path) = 0;
  // rename(2): atomic replacement of TO on one file system.
  virtual Status RenameFile(const std::string& from, const std::string& to) = 0;
  // Removes a file (OK when it was not there).
  virtual Status RemoveFile(const std::string& path) = 0;
  // Removes a folder and everything in it (OK when it was not there).
  virtual Status RemoveTree(const std::string& path) = 0;
  // Creates PATH and its parents (OK when it exists).
  virtual Status CreateDirectories(const std::string& path) = 0;
  virtual bool FileExists(const std::string& path) = 0;
  virtual Result<uint64_t> FileSize(const std::string& path) = 0;
  // The entries' names (not paths) in PATH, sorted; recursive: paths relative to PATH, files
  // only.
  virtual Result<std::vector<std::string>> ListDirectory(const std::string& path,
                                                         bool recursive) = 0;

  // Wall clock, Unix seconds (for what a map records: creation times, provenance).
  virtual int64_t NowUnixSeconds() = 0;
  // Monotonic clock in microseconds, for durations and timeouts.
  virtual int64_t NowMicros() = 0;
  // Blocks the calling thread.
  virtual void SleepForMicros(int64_t micros) = 0;
};

// Forwards every call to another Env (not owned; must outlive the wrapper). Subclasses override
// what they change.
class EnvWrapper : public Env {
 public:
  explicit EnvWrapper(Env* target) : target_(target) {}
  Env* target() const { return target_; }

  Result<std::string> ReadFile(const std::string& path) override { return target_->ReadFile(path); }
  Status WriteFile(const std::string& path, const void* data, size_t size) override {
    return target_->WriteFile(path, data, size);
  }
  Status SyncFile(const std::string& path) override { return target_->SyncFile(path); }
  Status RenameFile(const std::string& from, const std::string& to) override {
    return target_->RenameFile(from, to);
  }
  Status RemoveFile(const std::string& path) override { return target_->RemoveFile(path); }
  Status RemoveTree(const std::string& path) override { return target_->RemoveTree(path); }
  Status CreateDirectories(const std::string& path) override {
    return target_->CreateDirectories(path);
  }
  bool FileExists(const std::string& path) override { return target_->FileExists(path); }
  Result<uint64_t> FileSize(const std::string& path) override { return target_->FileSize(path); }
  Result<std::vector<std::string>> ListDirectory(const std::string& path, bool recursive) override {
    return target_->ListDirectory(path, recursive);
  }
  int64_t NowUnixSeconds() override { return target_->NowUnixSeconds(); }
  int64_t NowMicros() override { return target_->NowMicros(); }
  void SleepForMicros(int64_t micros) override { target_->SleepForMicros(micros); }

 private:
  Env* target_;
};

// Writes DATA to PATH whole or not at all: PATH.tmp.<pid>, fsync, rename onto PATH; the
// temporary file is removed on failure. Parent folders are created.
Status WriteFileAtomically(Env* env, const std::string& path, const void* data, size_t size);

// The last step of every atomic writer: TMP made durable, then renamed onto PATH (TMP removed on
// failure).
Status SyncAndRename(Env* env, const std::string& tmp, const std::string& path);

}  // namespace sightfix
