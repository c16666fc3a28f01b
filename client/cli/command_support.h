// What several commands of the sightfix CLI share: the safety caution, error reporting, flag
// parsing, the flags that choose a map or a server (and the checks that none of them is given
// where it has no effect), the connection to a server, and the JSON of a fix.
// Exit codes of every command: 0 done, 1 a server or a file could not be reached or written,
// 2 bad input (flags, files), 3 no answer (no fix, no relative pose), 130 interrupted.
// Functions that return an int "or kGoOn" have printed their error and return the exit code,
// or return kGoOn when the command should go on. Thread-compatible.
#pragma once

#include <boost/program_options.hpp>
#include <memory>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "client/api/client.h"
#include "client/eval/route_eval.h"
#include "indexer/base/status.h"
#include "server/engine/localizer.h"

namespace sightfix::cli {

namespace po = boost::program_options;

// Printed by every --help, every text answer and the report.
extern const char kSafety[];

// Returned by the checks below when the command should go on.
constexpr int kGoOn = -1;

// Prints "sightfix: MESSAGE" on stderr; returns `code`.
int Fail(const std::string& message, int code = 1);

// Parses a command's flags (argv[0] is the command's name) into *vm. Returns kGoOn, or the exit
// code: 0 after --help (which prints the options and the safety caution), 2 after a bad flag.
int ParseFlags(int argc, char** argv, const std::string& command,
               const po::options_description& desc, const po::positional_options_description& pos,
               po::variables_map* vm);

// "a,b,c" -> numbers; false unless exactly n finite numbers.
bool ParseNumbers(const std::string& text, size_t n, std::vector<double>* out);
// "H" or "H,LATERAL,LONGITUDINAL" metres into r's alert limits; false (r untouched) otherwise.
// The limits' own checks are IntegrityRequest::Validate's.
bool ParseAlertLimits(const std::string& text, IntegrityRequest* r);
// What a command says when ParseAlertLimits refuses its --alert-limits.
inline constexpr char kAlertLimitsForm[] =
    "--alert-limits must look like H or H,LATERAL,LONGITUDINAL (metres)";

// The flags that choose what answers: a map in this process or a server (and its token and the
// deadline of each call).
struct SourceFlags {
  std::string map_dir;
  std::string server;  // HOST:PORT[,HOST:PORT...]
  std::string token_file;
  // TLS (client.h ClientOptions): on with tls_ca.
  std::string tls_ca, tls_cert, tls_key, tls_server_name;
  int max_answer_age_ms = 0;  // ClientOptions::max_answer_age_ms
  int deadline_ms = 0;        // each command sets its default
};

// Adds --server, --token-file, the TLS flags (--tls-ca, --tls-cert, --tls-key,
// --tls-server-name) and --max-answer-age-ms.
void AddServerOptions(po::options_description* desc, SourceFlags* flags);
// Adds --map and the above (--deadline-ms is added by each command, where its help text
// belongs).
void AddSourceOptions(po::options_description* desc, SourceFlags* flags);

// Refuses, with --map, the flags that only a call to a server uses (--token-file, the TLS
// flags, --max-answer-age-ms, --deadline-ms): they would have no effect. Returns kGoOn or 2.
// REQUIRES: exactly one of map_dir and server is set.
int RefuseServerFlagsWithMap(const SourceFlags& flags, const po::variables_map& vm);

// A client of flags.server (HOST:PORT, or several comma-separated: replicas to fail over
// between) with the token read from flags.token_file (none when empty) and TLS as the flags say.
// InvalidArgument for a malformed --server or TLS flags without --tls-ca; the token file's, the
// certificates' and the connection's errors as they come.
Result<std::unique_ptr<Client>> ConnectTo(const SourceFlags& flags);

// A fix as `sightfix locate --json` prints it (README "locate"): position fields only when the
// fix has a position, prior fields only when the request had a prior.
nlohmann::json FixJson(const Fix& f);

// "none", "noisy:R" or "gnss" (replay's and fit-integrity's --prior) onto the evaluator's
// options; false when malformed.
bool ParsePriorMode(const std::string& text, RouteEvalOptions* o);

// One line for text outputs: "integrity: usable, protection levels 0.84 m horizontal, 0.52 m
// lateral, 0.71 m longitudinal at risk 0.001 (alert limit 2.00 m)", or "integrity: NOT usable
// (<state>: <detail>), ..." or "integrity: unavailable (not refined)".
std::string IntegrityLine(const FixIntegrity& i);

}  // namespace sightfix::cli
