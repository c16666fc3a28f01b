#include "server/service/syn_filter.h"

#include <arpa/inet.h>
#include <sys/socket.h>

#include <cerrno>
#include <cstring>

namespace sightfix::service_internal {

namespace {

sock_filter Op(uint16_t code, uint32_t k, uint8_t jt = 0, uint8_t jf = 0) {
  return sock_filter{code, jt, jf, k};
}

}  // namespace

// For a TCP socket the filter sees the packet from the TCP header on; the IP header is reached
// through SKF_NET_OFF (linux/filter.h). The program:
//   A = TCP flags; if (A & (SYN|ACK)) != SYN: pass
//   A = IP version; if A != 4: pass
//   A = IPv4 source; if A == each listed address: drop
//   pass
// A filter's return value is the number of bytes to keep: 0 drops, 0xffffffff keeps all.
std::vector<sock_filter> SynFilterProgram(const std::vector<std::string>& ipv4_addresses) {
  std::vector<uint32_t> sources;
  for (const std::string& a : ipv4_addresses) {
    in_addr addr{};
    if (sources.size() < kMaxSynFilterAddresses && inet_pton(AF_INET, a.c_str(), &addr) == 1)
      sources.push_back(ntohl(addr.s_addr));
  }
  constexpr uint32_t kTcpFlagsOffset = 13, kSyn = 0x02, kAck = 0x10;
  const auto n = static_cast<uint8_t>(sources.size());
  // Instructions after each test up to "pass" (the first return) and "drop" (the second).
  std::vector<sock_filter> p = {
      Op(BPF_LD | BPF_B | BPF_ABS, kTcpFlagsOffset),
      Op(BPF_ALU | BPF_AND | BPF_K, kSyn | kAck),
      Op(BPF_JMP | BPF_JEQ | BPF_K, kSyn, 0, static_cast<uint8_t>(n + 4)),  // not a SYN: pass
      Op(BPF_LD | BPF_B | BPF_ABS, static_cast<uint32_t>(SKF_NET_OFF)),
      Op(BPF_ALU | BPF_RSH | BPF_K, 4),
      Op(BPF_JMP | BPF_JEQ | BPF_K, 4, 0, static_cast<uint8_t>(n + 1)),  // not IPv4: pass
      Op(BPF_LD | BPF_W | BPF_ABS, static_cast<uint32_t>(SKF_NET_OFF + 12)),
  };
  for (uint8_t i = 0; i < n; ++i)
    p.push_back(Op(BPF_JMP | BPF_JEQ | BPF_K, sources[i], static_cast<uint8_t>(n - i), 0));
  p.push_back(Op(BPF_RET | BPF_K, 0xffffffffu));  // pass
  p.push_back(Op(BPF_RET | BPF_K, 0));            // drop
  return p;
}

Status SetSynFilter(int fd, const std::vector<std::string>& ipv4_addresses) {
  if (ipv4_addresses.empty()) {
    int unused = 0;
    if (setsockopt(fd, SOL_SOCKET, SO_DETACH_FILTER, &unused, sizeof unused) == 0 ||
        errno == ENOENT)  // none attached
      return Status::Ok();
    return Status::IoError(std::string("SO_DETACH_FILTER: ") + std::strerror(errno));
  }
  std::vector<sock_filter> program = SynFilterProgram(ipv4_addresses);
  sock_fprog fprog{static_cast<unsigned short>(program.size()), program.data()};
  if (setsockopt(fd, SOL_SOCKET, SO_ATTACH_FILTER, &fprog, sizeof fprog) != 0)
    return Status::IoError(std::string("SO_ATTACH_FILTER: ") + std::strerror(errno));
  return Status::Ok();
}

}  // namespace sightfix::service_internal
