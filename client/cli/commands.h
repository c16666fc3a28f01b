// The commands of the sightfix CLI, one file each. Each takes the command's own argv (argv[0]
// is the command's name), prints its answer on stdout and its errors on stderr, and returns
// the process's exit code (command_support.h lists them).
#pragma once

namespace sightfix::cli {

// Where one camera image was taken: a map in this process (--map) or a server (--server).
// 3 when no fix came back.
int Locate(int argc, char** argv);

// What a sightfix-server serves (map version, model, tiles, uptime, unusable tiles).
int Describe(int argc, char** argv);

// A query drive with truth through a map or a server: metrics, spoofing monitor, a report
// folder. 130 when Ctrl-C stopped it (the report, marked partial, is still written).
int Replay(int argc, char** argv);

// Fits the overbound of a map's fix errors on a drive with truth and records it in the map.
int FitIntegrity(int argc, char** argv);

// Two replay summaries side by side with their differences.
int Compare(int argc, char** argv);

// The relative pose of two images of one scene. 3 when no pose was found.
int Pair(int argc, char** argv);

}  // namespace sightfix::cli
