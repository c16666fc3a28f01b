#include "client/cli/command_support.h"

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <iostream>
#include <sstream>

#include "indexer/base/endpoint.h"

namespace sightfix::cli {

const char kSafety[] =
    "sightfix is a fallback aid, not a certified navigation source; defer to the vehicle's safety "
    "case and local regulations.";

int Fail(const std::string& message, int code) {
  std::fprintf(stderr, "sightfix: %s\n", message.c_str());
  return code;
}

int ParseFlags(int argc, char** argv, const std::string& command,
               const po::options_description& desc, const po::positional_options_description& pos,
               po::variables_map* vm) {
  try {
    po::store(po::command_line_parser(argc, argv).options(desc).positional(pos).run(), *vm);
    po::notify(*vm);
  } catch (const std::exception& e) {
    return Fail(std::string(e.what()) + " (see sightfix " + command + " --help)", 2);
  }
  if (vm->count("help")) {
    std::cout << desc << "\n" << kSafety << "\n";
    return 0;
  }
  return kGoOn;
}

bool ParseNumbers(const std::string& text, size_t n, std::vector<double>* out) {
  out->clear();
  std::stringstream ss(text);
  std::string item;
  while (std::getline(ss, item, ',')) {
    char* end = nullptr;
    const double v = std::strtod(item.c_str(), &end);
    if (item.empty() || *end != '\0' || !std::isfinite(v)) return false;
    out->push_back(v);
  }
  return out->size() == n;
}

bool ParseAlertLimits(const std::string& text, IntegrityRequest* r) {
  std::vector<double> v;
  if (!ParseNumbers(text, 1, &v) && !ParseNumbers(text, 3, &v)) return false;
  r->horizontal_alert_limit_m = v[0];
  if (v.size() == 3) r->lateral_alert_limit_m = v[1], r->longitudinal_alert_limit_m = v[2];
  return true;
}

void AddServerOptions(po::options_description* desc, SourceFlags* flags) {
  desc->add_options()("server", po::value(&flags->server),
                      "HOST:PORT of a sightfix-server; several, comma-separated, to fail over "
                      "between replicas")("token-file", po::value(&flags->token_file),
                                          "file holding the server's bearer token")(
      "tls-ca", po::value(&flags->tls_ca),
      "PEM CA bundle that signs the server's certificate: speak TLS 1.3 to the server")(
      "tls-cert", po::value(&flags->tls_cert),
      "PEM certificate of this vehicle (a TLS server requires one)")(
      "tls-key", po::value(&flags->tls_key), "PEM private key of --tls-cert")(
      "tls-server-name", po::value(&flags->tls_server_name),
      "name the server's certificate must carry (default: the host of --server)")(
      "max-answer-age-ms", po::value(&flags->max_answer_age_ms),
      "refuse an answer that arrives more than this after its request (0: the deadline "
      "alone)");
}

void AddSourceOptions(po::options_description* desc, SourceFlags* flags) {
  desc->add_options()("map", po::value(&flags->map_dir), "map folder");
  AddServerOptions(desc, flags);
}

int RefuseServerFlagsWithMap(const SourceFlags& flags, const po::variables_map& vm) {
  if (flags.map_dir.empty()) return kGoOn;
  for (const char* flag : {"token-file", "tls-ca", "tls-cert", "tls-key", "tls-server-name",
                           "max-answer-age-ms", "deadline-ms"})
    if (vm.count(flag))
      return Fail(std::string("--") + flag +
                      " applies to --server only: a map in this process has no server to call",
                  2);
  return kGoOn;
}

Result<std::unique_ptr<Client>> ConnectTo(const SourceFlags& flags) {
  const std::string& server = flags.server;
  ClientOptions options;
  options.tls_ca_file = flags.tls_ca, options.tls_cert_file = flags.tls_cert;
  options.tls_key_file = flags.tls_key, options.tls_server_name = flags.tls_server_name;
  if (flags.max_answer_age_ms < 0)
    return Status::InvalidArgument("--max-answer-age-ms must be >= 0 (0: the deadline alone)");
  options.max_answer_age_ms = flags.max_answer_age_ms;
  size_t start = 0;
  while (start <= server.size()) {
    const size_t comma = std::min(server.find(',', start), server.size());
    const std::string one = server.substr(start, comma - start);
    std::string host;
    int port = 0;
    if (!SplitHostPort(one, &host, &port))
      return Status::InvalidArgument("--server must look like HOST:PORT[,HOST:PORT...]");
    options.endpoints.push_back(one);
    start = comma + 1;
  }
  if (!flags.token_file.empty()) {
    Result<std::string> token = ReadTokenFile(flags.token_file);
    if (!token.ok()) return token.status();
    options.token = *token;
  }
  return Client::Connect(options);
}

namespace {

nlohmann::json ReferencesJson(const std::vector<ReferenceUse>& references) {
  nlohmann::json refs = nlohmann::json::array();
  for (const ReferenceUse& u : references)
    refs.push_back({{"tile", u.tile},
                    {"image", u.name},
                    {"retrieval_distance", u.retrieval_distance},
                    {"matches", u.matches},
                    {"inliers", u.inliers},
                    {"points", u.points},
                    {"verified", u.verified}});
  return refs;
}

nlohmann::json TimingsJson(const StageTimings& t) {
  return {{"decode", t.decode_ms}, {"features", t.features_ms}, {"retrieval", t.retrieval_ms},
          {"verify", t.verify_ms}, {"pose", t.pose_ms},         {"total", t.total_ms}};
}

// The fields of a fix with a position.
void AddPosition(const Fix& f, nlohmann::json* j) {
  (*j)["lat"] = f.lat_deg;
  (*j)["lon"] = f.lon_deg;
  (*j)["height"] = f.height_m;
  (*j)["heading_deg"] = f.heading_deg;
  (*j)["enu_to_camera"] = {f.enu_to_camera.w, f.enu_to_camera.x, f.enu_to_camera.y,
                           f.enu_to_camera.z};
  (*j)["covariance_en_m2"] = {f.covariance_en(0, 0), f.covariance_en(0, 1), f.covariance_en(1, 1)};
  (*j)["radius95_m"] = f.radius95_m;
}

}  // namespace

nlohmann::json FixJson(const Fix& f) {
  nlohmann::json j = {{"quality", FixQualityName(f.quality)},
                      {"capture_time_s", f.capture_time_s},
                      {"method", f.method},
                      {"references", ReferencesJson(f.references)},
                      {"correspondences", f.correspondences},
                      {"pnp_inliers", f.pnp_inliers},
                      {"timings_ms", TimingsJson(f.timings)}};
  if (f.quality != FixQuality::kNone) AddPosition(f, &j);
  if (!f.reason.empty()) j["reason"] = f.reason;
  if (const IntrinsicsChange& c = f.query_intrinsics; c.focal_scale_sigma > 0)
    j["query_camera"] = {{"focal_scale", c.focal_scale},
                         {"focal_scale_sigma", c.focal_scale_sigma},
                         {"k1_change", c.k1_change},
                         {"k1_change_sigma", c.k1_change_sigma}};
  const FixIntegrity& i = f.integrity;
  j["integrity"] = {{"state", IntegrityStateName(i.state)}, {"usable", i.usable()}};
  if (i.state != IntegrityState::kUnavailable) {
    j["integrity"].update({{"horizontal_pl_m", i.horizontal_pl_m},
                           {"lateral_pl_m", i.lateral_pl_m},
                           {"longitudinal_pl_m", i.longitudinal_pl_m},
                           {"integrity_risk", i.integrity_risk},
                           {"horizontal_alert_limit_m", i.horizontal_alert_limit_m},
                           {"lateral_alert_limit_m", i.lateral_alert_limit_m},
                           {"longitudinal_alert_limit_m", i.longitudinal_alert_limit_m},
                           {"overbound_scale", i.overbound_scale},
                           {"hypotheses", i.hypotheses},
                           {"hypotheses_skipped", i.hypotheses_skipped},
                           {"max_test_ratio", i.max_test_ratio}});
    if (!i.detail.empty()) j["integrity"]["detail"] = i.detail;
    if (!i.overbound_drive.empty()) j["integrity"]["overbound_drive"] = i.overbound_drive;
  }
  if (f.prior_distance_m >= 0) {
    j["prior_distance_m"] = f.prior_distance_m;
    j["outside_prior"] = f.outside_prior;
  }
  return j;
}

bool ParsePriorMode(const std::string& text, RouteEvalOptions* o) {
  if (text == "none" || text == "gnss") {
    o->prior = text == "none" ? PriorMode::kNone : PriorMode::kGnss;
    return true;
  }
  std::vector<double> r;
  if (text.rfind("noisy:", 0) != 0 || !ParseNumbers(text.substr(6), 1, &r) || !(r[0] > 0))
    return false;
  o->prior = PriorMode::kNoisy;
  o->prior_radius_m = o->prior_max_offset_m = r[0];  // centre uniformly within R of the truth
  return true;
}

std::string IntegrityLine(const FixIntegrity& i) {
  if (i.state == IntegrityState::kUnavailable) return "integrity: unavailable (not refined)";
  char buf[512];
  std::snprintf(buf, sizeof buf,
                "protection levels %.2f m horizontal, %.2f m lateral, %.2f m longitudinal at "
                "risk %g (alert limit %.2f m)",
                i.horizontal_pl_m, i.lateral_pl_m, i.longitudinal_pl_m, i.integrity_risk,
                i.horizontal_alert_limit_m);
  std::string text = buf;
  if (!i.overbound_drive.empty()) {
    std::snprintf(buf, sizeof buf, ", overbound %.2f fitted on drive %s", i.overbound_scale,
                  i.overbound_drive.c_str());
    text += buf;
  }
  if (i.usable()) return "integrity: usable, " + text;
  return std::string("integrity: NOT usable (") + IntegrityStateName(i.state) + ": " + i.detail +
         "), " + text;
}

}  // namespace sightfix::cli
