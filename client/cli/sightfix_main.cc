// sightfix: the command-line client: `locate` (one image, in process or through the server),
// `describe`, `replay` (a query drive with truth: metrics and report), `fit-integrity` (the
// protection levels' overbound, fitted on a drive), `compare` (two replays)
// and `pair` (the relative pose of two images). Each command lives in its own file
// (commands.h); this one dispatches.
#include <cstdio>
#include <string>

#include "client/cli/command_support.h"
#include "client/cli/commands.h"
#include "indexer/base/crash_report.h"
#include "indexer/base/threads.h"

namespace {

void Usage() {
  std::printf(
      "sightfix: visual localization client\n\nUsage: sightfix COMMAND [options]\n\nCommands:\n"
      "  locate --map MAPDIR --image FILE --camera CAMERA.yml [--prior LAT,LON,RADIUS_M] [--json]\n"
      "      where one image was taken, against a map, in this process\n"
      "  locate --server HOST:PORT --image FILE --camera CAMERA.yml [...]\n"
      "      the same through sightfix-server\n"
      "  describe --server HOST:PORT [--json]\n"
      "      what a server serves\n"
      "  replay (--map MAPDIR | --server HOST:PORT) --drive QUERYDIR --out REPORTDIR [--prior "
      "none|noisy:R|gnss]\n"
      "      replays a query drive with truth: metrics, GNSS spoofing monitor, report.html\n"
      "  fit-integrity --map MAPDIR --drive QUERYDIR [--dry-run]\n"
      "      fits the protection levels' error overbound on a drive with truth, into the map\n"
      "  compare REPORTDIR_A REPORTDIR_B\n"
      "      two replay summaries side by side\n"
      "  pair IMAGE_A IMAGE_B --camera A.yml [--camera-b B.yml] [--json]\n"
      "      relative pose of two images\n\n"
      "sightfix COMMAND --help tells more.\n%s\n",
      sightfix::cli::kSafety);
}

}  // namespace

int main(int argc, char** argv) {
  namespace cli = sightfix::cli;
  sightfix::InstallCrashReport("sightfix");
  sightfix::PinLibraryThreads();
  if (argc < 2 || std::string(argv[1]) == "--help" || std::string(argv[1]) == "-h") {
    Usage();
    return argc < 2 ? 2 : 0;
  }
  const std::string command = argv[1];
  if (command == "pair") return cli::Pair(argc - 1, argv + 1);
  if (command == "locate") return cli::Locate(argc - 1, argv + 1);
  if (command == "describe") return cli::Describe(argc - 1, argv + 1);
  if (command == "replay") return cli::Replay(argc - 1, argv + 1);
  if (command == "fit-integrity") return cli::FitIntegrity(argc - 1, argv + 1);
  if (command == "compare") return cli::Compare(argc - 1, argv + 1);
  Usage();
  return cli::Fail("unknown command '" + command + "'", 2);
}
