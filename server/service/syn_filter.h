// A kernel-side refusal of new TCP connections from flooding source addresses: a classic BPF
// socket filter (SO_ATTACH_FILTER; no privilege needed) on the query port's listening socket
// that drops SYNs (SYN set, ACK clear) from a list of source addresses. A dropped SYN makes
// no connection, so the server neither accepts nor closes it and the flooder's connect waits on
// its own retransmission timer instead of being answered at once. Every other packet passes,
// those of connections already made too (an accepted socket inherits the filter it was made
// under, and none of its packets is a bare SYN).
#pragma once

#include <linux/filter.h>

#include <string>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix::service_internal {

// At most this many addresses of each family in one program (a cBPF jump reaches 255
// instructions ahead; an IPv6 address takes 8).
constexpr size_t kMaxSynFilterAddresses = 200;
constexpr size_t kMaxSynFilterIpv6Addresses = 30;

// The program for `addresses` (IPv4 dotted quads, IPv6 text; a v4-mapped IPv6 address, as a
// dual-stack socket names an IPv4 peer, counts as IPv4; anything else is skipped, as are those
// past the maximum of their family). With none, a program that passes everything.
std::vector<sock_filter> SynFilterProgram(const std::vector<std::string>& addresses);

// Attaches SynFilterProgram(addresses) to the listening socket `fd`, replacing any filter
// before it; with no address, detaches instead. kIoError with the system's reason on failure.
Status SetSynFilter(int fd, const std::vector<std::string>& addresses);

}  // namespace sightfix::service_internal
