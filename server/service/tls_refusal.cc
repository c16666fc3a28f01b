#include "server/service/tls_refusal.h"

#include <cstdio>
#include <nlohmann/json.hpp>

namespace sightfix::service_internal {

void LogTlsRefusal(Service::Impl* svc, TlsPort port, const std::string& peer,
                   const std::string& why, bool log) {
  // One fprintf: the line reaches stderr whole, among the other threads' lines.
  if (log)
    std::fprintf(stderr, "{\"peer\":\"%s\",%s\"tls_refused\":%s}\n", peer.c_str(),
                 port == TlsPort::kHttp ? "\"port\":\"http\"," : "",
                 nlohmann::json(why).dump().c_str());
  ++svc->tls_refused;
}

}  // namespace sightfix::service_internal
