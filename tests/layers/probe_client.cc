// Links only sightfix_client, so tests/layers/check_layers.py can read a thin consumer's real
// link line. Connects to nothing.
#include <cstdio>

#include "client/api/client.h"

int main() {
  sightfix::ClientOptions options;
  std::printf("%s:%d\n", options.host.c_str(), options.port);
  return 0;
}
