#include "indexer/builder/calibration_lines.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <vector>

namespace sightfix {

std::string CalibrationLines(const nlohmann::json& cameras) {
  std::string out;
  char line[640];
  for (const nlohmann::json& c : cameras) {
    const std::string file = c.value("file", "?");
    const nlohmann::json& cal = c.at("calibration");
    if (cal.value("status", "") != "refined") {
      out += "camera " + file + ": as supplied (" + cal.value("why", "") + ")\n";
      continue;
    }
    const nlohmann::json &sup = c.at("supplied"), &ref = cal.at("refined");
    const auto sigma = cal.at("posterior_sigma").get<std::vector<double>>();
    const auto est = cal.at("estimated").get<std::vector<bool>>();
    const auto b = cal.at("boresight_rad").get<std::vector<double>>();
    const double f0 = sup.at("fx").get<double>(), f1 = ref.at("fx").get<double>();
    const double k10 = sup.at("distortion")[0].get<double>(), k11 = ref.at("distortion")[0];
    const double k20 = sup.at("distortion")[1].get<double>(), k21 = ref.at("distortion")[1];
    constexpr double kDeg = 180 / M_PI;
    std::snprintf(
        line, sizeof(line),
        "camera %s: focal %.2f -> %.2f px (%+.2f %%, sigma %.2f%s), k1 %.4f -> %.4f "
        "(sigma %.4f%s), k2 %.4f -> %.4f (sigma %.4f%s), boresight %.3f %.3f %.3f deg "
        "(sigma %.3f%s), time offset %.1f ms (sigma %.1f%s); move chi-square %.1f of %d dof%s\n",
        file.c_str(), f0, f1, 100 * (f1 / f0 - 1), sigma[0], est[0] ? "" : ", held", k10, k11,
        sigma[1], est[1] ? "" : ", held", k20, k21, sigma[2], est[2] ? "" : ", held", b[0] * kDeg,
        b[1] * kDeg, b[2] * kDeg, std::max({sigma[3], sigma[4], sigma[5]}) * kDeg,
        est[3] ? "" : ", held", 1e3 * cal.value("time_offset_s", 0.0),
        1e3 * cal.value("time_offset_sigma_s", 0.0),
        cal.value("time_offset_estimated", false) ? "" : ", held",
        cal.at("move_chi2").get<double>(), cal.at("move_dof").get<int>(),
        cal.at("move_alarm").get<bool>() ? ": MOVED BEYOND ITS PRIOR, check the file" : "");
    out += line;
  }
  return out;
}

std::string DrivesText(const nlohmann::json& provenance_in) {
  nlohmann::json provenance = provenance_in;
  std::string calibration;
  if (provenance.is_object() && provenance.contains("drives"))
    for (nlohmann::json& d : provenance["drives"])
      if (d.contains("cameras")) {
        calibration += CalibrationLines(d["cameras"]);
        d.erase("cameras");
      }
  return "drives: " + provenance.dump() + "\n" + calibration;
}

}  // namespace sightfix
