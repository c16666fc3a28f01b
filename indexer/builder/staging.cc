#include "indexer/builder/staging.h"

#include "indexer/base/sha256.h"

namespace sightfix::staging {

namespace fs = std::filesystem;

fs::path StagingDir(const std::string& map_dir) { return fs::path(map_dir) / "staging"; }
fs::path ModelFile(const std::string& map_dir) { return StagingDir(map_dir) / "model.bin"; }
fs::path ModelInfoFile(const std::string& map_dir) { return StagingDir(map_dir) / "model.json"; }

std::string ShardName(int shard, int shards) {
  return "shard-" + std::to_string(shard) + "-of-" + std::to_string(shards) + ".json";
}

Status WriteJson(Env* env, const fs::path& path, const json& j) {
  const std::string text = j.dump(1) + "\n";
  return WriteFileAtomically(env, path.string(), text.data(), text.size());
}

Result<json> ReadJson(Env* env, const fs::path& path, const std::string& what) {
  Result<std::string> text = env->ReadFile(path.string());
  if (!text.ok() || text->empty()) return Status::NotFound("no " + what + " at " + path.string());
  json j = json::parse(*text, nullptr, false);
  if (j.is_discarded() || !j.is_object())
    return Status::InvalidArgument(path.string() + " is not a " + what + " (not JSON)");
  return j;
}

std::string HexOf(const uint8_t* p, size_t n) {
  static const char kDigits[] = "0123456789abcdef";
  std::string s(2 * n, '0');
  for (size_t i = 0; i < n; ++i) {
    s[2 * i] = kDigits[p[i] >> 4];
    s[2 * i + 1] = kDigits[p[i] & 15];
  }
  return s;
}

bool BytesOfHex(const std::string& s, uint8_t* out, size_t n) {
  if (s.size() != 2 * n) return false;
  auto nibble = [](char c) {
    return c >= '0' && c <= '9' ? c - '0' : c >= 'a' && c <= 'f' ? c - 'a' + 10 : -1;
  };
  for (size_t i = 0; i < n; ++i) {
    const int hi = nibble(s[2 * i]), lo = nibble(s[2 * i + 1]);
    if (hi < 0 || lo < 0) return false;
    out[i] = static_cast<uint8_t>(hi * 16 + lo);
  }
  return true;
}

json KeyJson(const TileKey& k) { return {k.zoom, k.x, k.y}; }

TileKey KeyOf(const json& j) {
  TileKey k;
  k.zoom = j.at(0).get<int>();
  k.x = j.at(1).get<uint32_t>();
  k.y = j.at(2).get<uint32_t>();
  return k;
}

Result<Survey> ReadRows(const BuildOptions& o, std::string* input_format,
                        std::vector<std::string>* skipped) {
  Result<SurveyRows> rows = build_internal::ReadSurvey(o);
  if (!rows.ok()) return rows.status();
  *input_format = SurveyFormatName(rows->format);
  *skipped = rows->problems;
  Survey s;
  s.rows = std::move(rows->rows);
  s.attitude_sigma_deg = std::move(rows->attitude_sigma_deg);
  s.origin = std::move(rows->origin);
  if (Status st = build_internal::LoadCameras(o, &s, skipped); !st.ok()) return st;
  return s;
}

Result<Plan> LoadPlan(Env* env, const std::string& path) {
  Result<json> j = ReadJson(env, path, "build plan");
  if (!j.ok()) return j.status();
  if (j->value("format", "") != kPlanFormat || j->value("format_version", 0) != kPlanFormatVersion)
    return Status::InvalidArgument(path + " is not a sightfix build plan of format version " +
                                   std::to_string(kPlanFormatVersion));
  Plan p;
  try {
    p.id = j->at("plan_id").get<std::string>();
    p.map_dir = j->at("map_dir").get<std::string>();
    p.drive = j->at("drive").get<std::string>();
    p.shards = j->at("shards").get<int>();
    p.map_version = j->at("map_version").get<int>();
    j->at("rows").get_ref<const json::array_t&>();
    j->at("jobs").get_ref<const json::array_t&>();
  } catch (const std::exception& e) {
    return Status::InvalidArgument(path + ": " + e.what());
  }
  p.j = std::move(j).value();
  return p;
}

BuildOptions OptionsOf(const Plan& p, const StepOptions& step) {
  BuildOptions o;
  o.drive_dir = p.drive;
  o.map_dir = p.map_dir;
  o.zoom = p.j.at("zoom").get<int>();
  o.margin_m = p.j.at("margin_m").get<double>();
  o.features.max_features = p.j.at("max_features").get<int>();
  o.skip_bad = p.j.at("skip_bad").get<bool>();
  o.jobs = step.jobs;
  o.progress = step.progress;
  o.env = step.env;
  return o;
}

Result<StagedModel> LoadStagedModel(Env* env, const std::string& map_dir) {
  Result<std::string> bytes = env->ReadFile(ModelFile(map_dir).string());
  if (!bytes.ok() || bytes->empty())
    return Status(StatusCode::kFailedPrecondition,
                  "no trained model at " + ModelFile(map_dir).string() + " (run train first)");
  std::vector<uint8_t> blob(bytes->begin(), bytes->end());
  Result<GlobalDescriptor> model = GlobalDescriptor::Deserialize(blob);
  if (!model.ok()) return model.status();
  Result<json> info = ReadJson(env, ModelInfoFile(map_dir), "model summary");
  if (!info.ok()) return info.status();
  StagedModel m{std::move(model).value(), Sha256Hex(blob).substr(0, 16), std::move(info).value(),
                std::move(blob)};
  if (m.info.value("model_id", "") != m.id)
    return Status(
        StatusCode::kFailedPrecondition,
        ModelInfoFile(map_dir).string() + " does not describe " + ModelFile(map_dir).string());
  return m;
}

}  // namespace sightfix::staging
