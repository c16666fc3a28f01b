// Where a server is and how a caller proves who it is: "HOST:PORT" text and the bearer token
// file. Shared by the server, the client library and the CLI. Thread-safe (pure functions).
#pragma once

#include <string>

#include "indexer/base/status.h"

namespace sightfix {

// "host:port" -> parts ("[::1]:7411" gives host "::1"); false when malformed or the port is
// over 65535. Names are not resolved here.
bool SplitHostPort(const std::string& text, std::string* host, int* port);

// The bearer token in a file: its first line, trailing white space removed. kNotFound when the
// file cannot be read.
Result<std::string> ReadTokenFile(const std::string& path);

}  // namespace sightfix
