// A kernel-side refusal of new TCP connections from flooding source addresses: a classic BPF
// socket filter (SO_ATTACH_FILTER; no privilege needed) on the query port's listening socket
// that drops SYNs (SYN set, ACK clear) from a list of IPv4 source addresses. A dropped SYN makes
// no connection, so the server neither accepts nor closes it and the flooder's connect waits on
// its own retransmission timer instead of being answered at once. Every other packet passes,
// those of connections already made too (an accepted socket inherits the filter it was made
// under, and none of its packets is a bare SYN). IPv6 sources are never dropped here.
#pragma once

#include <linux/filter.h>

#include <string>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix::service_internal {

// At most this many addresses in one program (cBPF jumps reach 255 instructions ahead).
constexpr size_t kMaxSynFilterAddresses = 200;

// The program for `ipv4_addresses` (dotted quads; anything else is skipped, as are those past
// kMaxSynFilterAddresses). With none, a program that passes everything.
std::vector<sock_filter> SynFilterProgram(const std::vector<std::string>& ipv4_addresses);

// Attaches SynFilterProgram(addresses) to the listening socket `fd`, replacing any filter
// before it; with no address, detaches instead. kIoError with the system's reason on failure.
Status SetSynFilter(int fd, const std::vector<std::string>& ipv4_addresses);

}  // namespace sightfix::service_internal
