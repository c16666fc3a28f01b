#include "indexer/base/progress.h"

#include <unistd.h>

#include <algorithm>

namespace sightfix {

Progress::Progress(std::string label, long total, std::FILE* out)
    : label_(std::move(label)),
      total_(std::max(total, 1L)),
      out_(out),
      tty_(isatty(fileno(out)) != 0),
      start_(std::chrono::steady_clock::now()),
      last_draw_(start_) {}

Progress::~Progress() { Finish(); }

double Progress::ElapsedS() const {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
}

void Progress::Advance(long n) {
  std::lock_guard<std::mutex> lock(mu_);
  done_ += n;
  const auto now = std::chrono::steady_clock::now();
  const double since = std::chrono::duration<double>(now - last_draw_).count();
  const int decile = static_cast<int>(10 * done_ / total_);
  const bool due = tty_ ? since > 0.2 : (decile > last_decile_ || since > 10.0);
  if (due && done_ < total_) {
    last_decile_ = decile;
    last_draw_ = now;
    Draw(false);
  }
}

void Progress::Finish() {
  std::lock_guard<std::mutex> lock(mu_);
  if (finished_) return;
  finished_ = true;
  Draw(true);
}

void Progress::Draw(bool final_line) {
  const double elapsed = ElapsedS();
  const double rate = elapsed > 0 ? done_ / elapsed : 0.0;
  const double eta = rate > 0 ? (total_ - done_) / rate : 0.0;
  const int pct = static_cast<int>(100 * done_ / total_);
  if (tty_) {
    const int width = 28, filled = width * pct / 100;
    std::fprintf(out_, "\r%-18s [%s%s] %3d%% %ld/%ld %.1f/s ETA %.0fs ", label_.c_str(),
                 std::string(filled, '#').c_str(), std::string(width - filled, '.').c_str(), pct,
                 done_, total_, rate, eta);
    if (final_line) std::fprintf(out_, "\n");
  } else if (final_line) {
    std::fprintf(out_, "%s: %ld/%ld done in %.1f s (%.1f/s)\n", label_.c_str(), done_, total_,
                 elapsed, rate);
  } else {
    std::fprintf(out_, "%s: %ld/%ld (%d%%), %.1f/s, ETA %.0f s\n", label_.c_str(), done_, total_,
                 pct, rate, eta);
  }
  std::fflush(out_);
}

}  // namespace sightfix
