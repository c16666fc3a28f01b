// sightfix describe: what a sightfix-server serves.
#include <cstdio>
#include <iostream>
#include <string>

#include "client/cli/command_support.h"
#include "client/cli/commands.h"

namespace sightfix::cli {
namespace {

po::options_description DescribeOptions(SourceFlags* flags) {
  po::options_description desc(
      "sightfix describe: what a sightfix-server serves (map version, model, tiles, uptime).\n\n"
      "Usage: sightfix describe --server HOST:PORT [--token-file F] [--tls-ca F --tls-cert F\n"
      "       --tls-key F [--tls-server-name N]] [--json]\n\nOptions");
  desc.add_options()("help,h", "show this help");
  AddServerOptions(&desc, flags);
  desc.add_options()("json", "print JSON on stdout");
  return desc;
}

nlohmann::json DescriptionJson(const v1::DescribeResponse& d) {
  nlohmann::json j = {{"map_version", d.map_version()},
                      {"model_id", d.model_id()},
                      {"tiles", d.tiles()},
                      {"images", d.images()},
                      {"server_version", d.server_version()},
                      {"uptime_s", d.uptime_s()},
                      {"tiles_cached", d.tiles_cached()},
                      {"tiles_checked", d.tiles_checked()},
                      {"bad_tiles", nlohmann::json::array()}};
  for (const auto& b : d.bad_tiles())
    j["bad_tiles"].push_back({{"tile", b.tile()}, {"reason", b.reason()}});
  return j;
}

void PrintDescription(const v1::DescribeResponse& d) {
  std::printf("%s: map version %d (model %s), %d tiles, %d images, %d tiles cached, up %.0f s\n",
              d.server_version().c_str(), d.map_version(), d.model_id().c_str(), d.tiles(),
              d.images(), d.tiles_cached(), d.uptime_s());
  std::printf("tiles checked: %d of %d; unusable: %d\n", d.tiles_checked(), d.tiles(),
              d.bad_tiles_size());
  for (const auto& b : d.bad_tiles())
    std::printf("  %s %s\n", b.tile().c_str(), b.reason().c_str());
}

}  // namespace

int Describe(int argc, char** argv) {
  SourceFlags flags;
  const po::options_description desc = DescribeOptions(&flags);
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "describe", desc, {}, &vm); rc != kGoOn) return rc;
  if (flags.server.empty()) return Fail("describe needs --server HOST:PORT", 2);
  auto client = ConnectTo(flags);
  if (!client.ok()) return Fail(client.status().ToString(), 1);
  Result<v1::DescribeResponse> d = (*client)->Describe(5000);
  if (!d.ok()) return Fail(d.status().ToString(), 1);
  if (vm.count("json"))
    std::cout << DescriptionJson(*d).dump(2) << "\n";
  else
    PrintDescription(*d);
  return 0;
}

}  // namespace sightfix::cli
