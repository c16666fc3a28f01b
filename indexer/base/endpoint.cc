#include "indexer/base/endpoint.h"

#include <cctype>
#include <fstream>

namespace sightfix {

Result<std::string> ReadTokenFile(const std::string& path) {
  std::ifstream in(path);
  if (!in) return Status::NotFound("cannot read token file " + path);
  std::string token;
  std::getline(in, token);
  while (!token.empty() && std::isspace(static_cast<unsigned char>(token.back()))) token.pop_back();
  return token;
}

bool SplitHostPort(const std::string& text, std::string* host, int* port) {
  const size_t colon = text.rfind(':');
  if (colon == std::string::npos || colon == 0) return false;
  *host = text.substr(0, colon);
  if (host->size() > 2 && host->front() == '[' && host->back() == ']')
    *host = host->substr(1, host->size() - 2);
  const std::string p = text.substr(colon + 1);
  if (p.empty() || p.size() > 5 || p.find_first_not_of("0123456789") != std::string::npos)
    return false;
  *port = std::stoi(p);
  return *port <= 65535;
}

}  // namespace sightfix
