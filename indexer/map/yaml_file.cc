#include "indexer/map/yaml_file.h"

#include <cmath>
#include <fstream>
#include <iterator>

namespace sightfix {

namespace {

constexpr size_t kMaxBytes = 1 << 20;
constexpr int kMaxDepth = 32;

// Flow brackets and block indentation, the two ways YAML nests; a rough bound is enough.
bool TooDeep(const std::string& text) {
  int flow = 0;
  size_t line_start = 0;
  for (size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    if (c == '[' || c == '{') {
      if (++flow > kMaxDepth) return true;
    } else if ((c == ']' || c == '}') && flow > 0) {
      --flow;
    } else if (c == '\n') {
      line_start = i + 1;
    } else if (i == line_start) {
      size_t j = i;
      while (j < text.size() && (text[j] == ' ' || text[j] == '-')) ++j;
      if (j - i > 2 * kMaxDepth) return true;
    }
  }
  return false;
}

}  // namespace

Result<YAML::Node> LoadYamlFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return Status::NotFound("cannot open " + path);
  std::string text;
  text.resize(kMaxBytes + 1);
  in.read(text.data(), static_cast<std::streamsize>(text.size()));
  text.resize(static_cast<size_t>(in.gcount()));
  if (text.size() > kMaxBytes)
    return Status::InvalidArgument(path + ": over 1 MiB, not a calibration or rig file");
  // OpenCV writes "%YAML:1.0", which is not a YAML 1.2 directive: dropped.
  if (text.rfind("%YAML:", 0) == 0) text.erase(0, std::min(text.find('\n'), text.size()));
  if (TooDeep(text)) return Status::InvalidArgument(path + ": nested too deeply");
  try {
    YAML::Node root = YAML::Load(text);
    if (!root.IsMap()) return Status::InvalidArgument(path + ": not a YAML mapping");
    return root;
  } catch (const YAML::Exception& e) {
    return Status::InvalidArgument(path + ":" + std::to_string(e.mark.line + 1) + ": " + e.msg);
  } catch (const std::exception& e) {
    return Status::InvalidArgument(path + ": " + e.what());
  }
}

Result<double> YamlNumber(const YAML::Node& node, const std::string& what) {
  double v = 0;
  if (!node || !node.IsScalar() || !YAML::convert<double>::decode(node, v) || !std::isfinite(v))
    return Status::InvalidArgument(what + " must be a number");
  return v;
}

Result<std::string> YamlText(const YAML::Node& node, const std::string& what) {
  if (!node || !node.IsScalar()) return Status::InvalidArgument(what + " must be text");
  return node.Scalar();
}

Result<std::vector<double>> YamlMatrix(const YAML::Node& node, const std::string& what, int* rows,
                                       int* cols) {
  if (!node) return Status::InvalidArgument(what + " is missing");
  int r = -1, c = -1;
  if (node.IsMap()) {
    Result<double> rr = YamlNumber(node["rows"], what + ": rows");
    Result<double> cc = YamlNumber(node["cols"], what + ": cols");
    if (!rr.ok()) return rr.status();
    if (!cc.ok()) return cc.status();
    if (*rr < 0 || *rr > 64 || *cc < 0 || *cc > 64 || *rr != std::floor(*rr) ||
        *cc != std::floor(*cc))
      return Status::InvalidArgument(what + ": rows and cols must be whole numbers up to 64");
    r = static_cast<int>(*rr), c = static_cast<int>(*cc);
  }
  // No Node assignment: in yaml-cpp it rebinds content and throws on a missing key.
  const YAML::Node data = node.IsMap() ? node["data"] : node;
  if (!data || !data.IsSequence())
    return Status::InvalidArgument(what + ": data must be a list of numbers");
  std::vector<double> values;
  for (size_t i = 0; i < data.size(); ++i) {
    Result<double> v = YamlNumber(data[i], what + ": data[" + std::to_string(i) + "]");
    if (!v.ok()) return v.status();
    values.push_back(*v);
  }
  if (r < 0) r = 1, c = static_cast<int>(values.size());
  if (static_cast<size_t>(r) * static_cast<size_t>(c) != values.size())
    return Status::InvalidArgument(what + ": " + std::to_string(r) + " x " + std::to_string(c) +
                                   " does not match " + std::to_string(values.size()) + " values");
  if (rows) *rows = r;
  if (cols) *cols = c;
  return values;
}

}  // namespace sightfix
