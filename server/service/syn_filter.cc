#include "server/service/syn_filter.h"

#include <arpa/inet.h>
#include <sys/socket.h>

#include <array>
#include <cerrno>
#include <cstring>

namespace sightfix::service_internal {

namespace {

// A jump target: an instruction's index once the program is laid out.
enum Label { kNext, kPass4, kDrop4, kV6, kPass6, kDrop6, kLabels };

// One instruction with symbolic jump targets.
struct Line {
  uint16_t code;
  uint32_t k;
  int jt = kNext, jf = kNext;  // a Label, or -1 - i for "the start of v6 address i + 1"
};

// The sources to drop, IPv4 (host order) and IPv6 (four words, host order each); a v4-mapped
// IPv6 address ("::ffff:a.b.c.d", as a dual-stack socket names an IPv4 peer) is IPv4 on the wire.
void Parse(const std::vector<std::string>& addresses, std::vector<uint32_t>* v4,
           std::vector<std::array<uint32_t, 4>>* v6) {
  for (const std::string& a : addresses) {
    in_addr addr4{};
    in6_addr addr6{};
    if (inet_pton(AF_INET, a.c_str(), &addr4) == 1) {
      if (v4->size() < kMaxSynFilterAddresses) v4->push_back(ntohl(addr4.s_addr));
    } else if (inet_pton(AF_INET6, a.c_str(), &addr6) == 1) {
      std::array<uint32_t, 4> w;
      for (int i = 0; i < 4; ++i) {
        uint32_t be;
        std::memcpy(&be, addr6.s6_addr + 4 * i, 4);
        w[i] = ntohl(be);
      }
      if (IN6_IS_ADDR_V4MAPPED(&addr6)) {
        if (v4->size() < kMaxSynFilterAddresses) v4->push_back(w[3]);
      } else if (v6->size() < kMaxSynFilterIpv6Addresses) {
        v6->push_back(w);
      }
    }
  }
}

}  // namespace

// For a TCP socket the filter sees the packet from the TCP header on; the IP header is reached
// through SKF_NET_OFF (linux/filter.h). The program:
//   A = TCP flags; if (A & (SYN|ACK)) != SYN: pass
//   A = IP version; if 4: A = source, drop if it equals a listed IPv4 address, else pass;
//   if 6: drop if the source's four words equal a listed IPv6 address's, else pass; else pass.
// A filter's return value is the number of bytes to keep: 0 drops, 0xffffffff keeps all. A
// jump reaches at most 255 instructions ahead, so each family has its own pass and drop.
std::vector<sock_filter> SynFilterProgram(const std::vector<std::string>& addresses) {
  std::vector<uint32_t> v4;
  std::vector<std::array<uint32_t, 4>> v6;
  Parse(addresses, &v4, &v6);
  constexpr uint32_t kTcpFlagsOffset = 13, kSyn = 0x02, kAck = 0x10;
  const uint32_t net = static_cast<uint32_t>(SKF_NET_OFF);
  std::vector<Line> lines = {
      {BPF_LD | BPF_B | BPF_ABS, kTcpFlagsOffset},
      {BPF_ALU | BPF_AND | BPF_K, kSyn | kAck},
      {BPF_JMP | BPF_JEQ | BPF_K, kSyn, kNext, kPass4},
      {BPF_LD | BPF_B | BPF_ABS, net},
      {BPF_ALU | BPF_RSH | BPF_K, 4},
      {BPF_JMP | BPF_JEQ | BPF_K, 4, kNext, kV6},
      {BPF_LD | BPF_W | BPF_ABS, net + 12},
  };
  for (uint32_t a : v4) lines.push_back({BPF_JMP | BPF_JEQ | BPF_K, a, kDrop4, kNext});
  std::array<int, kLabels> at{};
  at[kPass4] = static_cast<int>(lines.size());
  lines.push_back({BPF_RET | BPF_K, 0xffffffffu});
  at[kDrop4] = static_cast<int>(lines.size());
  lines.push_back({BPF_RET | BPF_K, 0});
  at[kV6] = static_cast<int>(lines.size());
  lines.push_back({BPF_JMP | BPF_JEQ | BPF_K, 6, kNext, kPass6});
  std::vector<int> v6_start;
  for (size_t i = 0; i < v6.size(); ++i) {
    v6_start.push_back(static_cast<int>(lines.size()));
    const int next = -1 - static_cast<int>(i);  // the next address's block (or kPass6)
    for (int w = 0; w < 4; ++w) {
      lines.push_back({BPF_LD | BPF_W | BPF_ABS, net + 8 + 4 * static_cast<uint32_t>(w)});
      lines.push_back({BPF_JMP | BPF_JEQ | BPF_K, v6[i][w], w == 3 ? kDrop6 : kNext, next});
    }
  }
  at[kPass6] = static_cast<int>(lines.size());
  v6_start.push_back(at[kPass6]);
  lines.push_back({BPF_RET | BPF_K, 0xffffffffu});
  at[kDrop6] = static_cast<int>(lines.size());
  lines.push_back({BPF_RET | BPF_K, 0});
  std::vector<sock_filter> p;
  for (size_t i = 0; i < lines.size(); ++i) {
    auto offset = [&](int target) {
      const int index = target == kNext ? static_cast<int>(i) + 1
                        : target < 0    ? v6_start[static_cast<size_t>(-target)]
                                        : at[static_cast<size_t>(target)];
      return static_cast<uint8_t>(index - static_cast<int>(i) - 1);
    };
    const bool jump = BPF_CLASS(lines[i].code) == BPF_JMP;
    p.push_back({lines[i].code, jump ? offset(lines[i].jt) : uint8_t{0},
                 jump ? offset(lines[i].jf) : uint8_t{0}, lines[i].k});
  }
  return p;
}

Status SetSynFilter(int fd, const std::vector<std::string>& addresses) {
  if (addresses.empty()) {
    int unused = 0;
    if (setsockopt(fd, SOL_SOCKET, SO_DETACH_FILTER, &unused, sizeof unused) == 0 ||
        errno == ENOENT)  // none attached
      return Status::Ok();
    return Status::IoError(std::string("SO_DETACH_FILTER: ") + std::strerror(errno));
  }
  std::vector<sock_filter> program = SynFilterProgram(addresses);
  sock_fprog fprog{static_cast<unsigned short>(program.size()), program.data()};
  if (setsockopt(fd, SOL_SOCKET, SO_ATTACH_FILTER, &fprog, sizeof fprog) != 0)
    return Status::IoError(std::string("SO_ATTACH_FILTER: ") + std::strerror(errno));
  return Status::Ok();
}

}  // namespace sightfix::service_internal
