// Progress of long work on stderr: a redrawn bar with rate and ETA on a terminal, plain lines
// (every 10 % or 10 s) when stderr is piped. Thread-safe: Advance may be called from any thread.
#pragma once

#include <chrono>
#include <cstdio>
#include <mutex>
#include <string>

namespace sightfix {

class Progress {
 public:
  // total: number of items; label: what is counted ("survey images").
  Progress(std::string label, long total, std::FILE* out = stderr);
  ~Progress();  // calls Finish() if not yet called
  void Advance(long n = 1);
  void Finish();
  double ElapsedS() const;

 private:
  void Draw(bool final_line);  // REQUIRES: mu_ held

  std::string label_;
  long total_;
  long done_ = 0;
  std::FILE* out_;
  bool tty_;
  bool finished_ = false;
  int last_decile_ = -1;
  std::chrono::steady_clock::time_point start_, last_draw_;
  std::mutex mu_;
};

}  // namespace sightfix
