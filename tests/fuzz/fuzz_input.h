// Shared by the libFuzzer targets: the readers under test take a path, so each input is written
// to a file in a private folder first (on tmpfs, /dev/shm, when there is one).
#pragma once

#include <unistd.h>

#include <cstdint>
#include <cstdio>
#include <filesystem>
#include <string>

namespace sightfix::fuzz {

// The folder, removed again when the process exits normally.
struct InputDir {
  std::string path;
  InputDir() {
    const std::string base = std::filesystem::exists("/dev/shm") ? "/dev/shm" : "/tmp";
    path = base + "/sightfix-fuzz-" + std::to_string(::getpid());
    std::filesystem::create_directories(path);
  }
  ~InputDir() {
    std::error_code ec;
    std::filesystem::remove_all(path, ec);
  }
};

inline const std::string& Dir() {
  static const InputDir dir;
  return dir.path;
}

// Writes bytes to Dir()/name and returns the path.
inline std::string WriteInput(const std::string& name, const uint8_t* data, size_t size) {
  const std::string path = Dir() + "/" + name;
  FILE* f = std::fopen(path.c_str(), "wb");
  if (!f) std::abort();
  if (size && std::fwrite(data, 1, size, f) != size) std::abort();
  std::fclose(f);
  return path;
}

inline std::string WriteText(const std::string& name, const std::string& text) {
  return WriteInput(name, reinterpret_cast<const uint8_t*>(text.data()), text.size());
}

// An invariant of the code under test broke: a crash for the fuzzer.
#define FUZZ_CHECK(cond)                                                                 \
  do {                                                                                   \
    if (!(cond)) {                                                                       \
      std::fprintf(stderr, "invariant failed: %s (%s:%d)\n", #cond, __FILE__, __LINE__); \
      std::abort();                                                                      \
    }                                                                                    \
  } while (0)

}  // namespace sightfix::fuzz
