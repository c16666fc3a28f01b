// The soak's phases under attack (scripts/soak.sh --attack), each --seconds long:
//  1. unloaded: the well-behaved clients alone;
//  2. attacked: the same clients while a handshake and a query flooder run (soak_attack.h);
//  3. control: the same clients while a burner takes the CPU the flooders took in phase 2,
//     without touching the network.
// On one host the flooders' own processes share the server's cores, which a radio-link attacker
// does not. Phase 3 holds that share equal, so attacked p99 / control p99 is what the server's
// defence costs the others; attacked / unloaded is reported beside it (host sharing included).
#pragma once

#include <atomic>
#include <cstdint>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "tests/bench/soak_attack.h"

namespace sightfix::soak {

// The well-behaved clients' calls in one phase, by the phase in which each started.
struct PhaseCalls {
  std::vector<double> locate_ms;  // good locates answered OK
  long calls = 0, shed = 0, unexpected = 0;
};

// Keeps `cores` of CPU busy (ceil(cores) threads, each spinning for its share of every 10 ms
// of its own CPU time, sleeping the rest) from construction until destruction.
class CpuBurner {
 public:
  explicit CpuBurner(double cores);
  ~CpuBurner();

 private:
  std::atomic<bool> stop_{false};
  std::vector<std::thread> threads_;
};

struct AttackOptions {
  HandshakeFloodOptions handshakes;
  QueryFloodOptions queries;
  int pid = 0;               // the server's, for /proc
  std::string metrics_host;  // its HTTP side port
  int metrics_port = 0;
};

// Snapshots of the server at each phase's start and end, the two flooders in phase 2, the burner
// in phase 3, and the figures. Not thread-safe: one thread drives it, in the order of the
// methods below.
class AttackPhase {
 public:
  explicit AttackPhase(AttackOptions options);
  ~AttackPhase();
  void MarkUnloadedStart();
  Status Begin();  // a snapshot, then both flooders start; fails when one cannot start
  void Sample();   // while attacked: keeps the peak of the server's open connections
  // The attack ends: a snapshot; the burner starts, taking the cores this process took beyond
  // its unloaded ones (the flooders'); both flooders stop (their calls in flight answered);
  // then the control phase's starting snapshot. Returns the cores the burner was asked for.
  double BeginControl();
  void EndControl();  // the burner stops, then a snapshot
  // After EndControl: the attack's part of the verdict. Prints the figures and returns them as
  // `"name":value,...` (no braces); `why` is left empty when every check passes, else names the
  // first that failed: the well-behaved clients' attacked p99 Locate latency within max_ratio x
  // their control one, none of their calls failed or shed under attack, none sent again (their
  // think time never meets their share), and the flooders met the server's limits.
  std::string Judge(const PhaseCalls& unloaded, const PhaseCalls& attacked,
                    const PhaseCalls& control, uint64_t resent, double max_ratio,
                    std::string* why) const;

 private:
  void Print() const;
  std::string JsonMembers() const;
  // Other processes kept the cores busy in a phase: the ratio says more about them than about
  // the attack (reported, not judged).
  bool Disturbed() const;
  // The query flooder got RATE_LIMITED answers, the handshake flooder was closed before TLS (a
  // handshake limit) and refused without a certificate, and the server counted more TLS
  // refusals attacked than unloaded.
  bool LimitsWorked(std::string* why) const;

  AttackOptions o_;
  std::unique_ptr<HandshakeFlood> handshakes_;
  std::unique_ptr<QueryFlood> queries_;
  std::unique_ptr<CpuBurner> burner_;
  double burn_cores_ = 0;
  HandshakeFloodCounts handshake_counts_;
  QueryFloodCounts query_counts_;
  // Phase starts and ends: unloaded_ -> attacked_ -> end_, then control_ -> control_end_.
  ServerSnapshot unloaded_, attacked_, end_, control_, control_end_;
  double connections_peak_ = 0;
};

}  // namespace sightfix::soak
