// engine_eval: replays query drives through the in-process engine and prints the route metrics
// (client/eval/route_eval.h). A developer tool for calibration, the structure-versus-pair
// comparison and scripts/bench.sh; evaluators get `sightfix replay` (the evaluator issue).
//
// Usage: engine_eval --map MAPDIR --drive QUERYDIR [--drive ...] [--prior none|noisy]
//          [--method auto|points|pair] [--covariance-scale X] [--survey-error correlated|white]
//          [--look-alike-checks N] [--look-alike-depth N] [--limit N] [--seed N] [--jobs N]
//          [--csv FILE]
#include <boost/program_options.hpp>
#include <cstdio>
#include <fstream>
#include <iostream>

#include "client/eval/route_eval.h"
#include "indexer/base/threads.h"

namespace po = boost::program_options;

int main(int argc, char** argv) {
  sightfix::PinLibraryThreads();
  std::string map_dir, prior = "noisy", method = "auto", survey_error = "correlated", csv;
  std::vector<std::string> drives;
  sightfix::LocalizerOptions lo;
  sightfix::RouteEvalOptions eo;
  po::options_description desc("engine_eval: route metrics of the in-process engine");
  desc.add_options()("help,h", "show this help")("map", po::value(&map_dir), "map folder")(
      "drive", po::value(&drives)->composing(), "query drive folder (repeatable)")(
      "prior", po::value(&prior), "none or noisy (150 m circle within 100 m of the truth)")(
      "method", po::value(&method), "auto, points or pair")(
      "covariance-scale", po::value(&lo.covariance_scale), "LocalizerOptions::covariance_scale")(
      "survey-error", po::value(&survey_error),
      "correlated (real surveys) or white (the clean demo town): LocalizerOptions::survey_error")(
      "look-alike-checks", po::value(&lo.look_alike_checks),
      "LocalizerOptions::look_alike_checks (0: the check off)")(
      "look-alike-depth", po::value(&lo.look_alike_depth), "LocalizerOptions::look_alike_depth")(
      "limit", po::value(&eo.limit), "first N queries of each drive")(
      "seed", po::value(&eo.seed), "prior noise seed")("jobs", po::value(&eo.jobs), "threads")(
      "csv", po::value(&csv), "write one row per query here");
  po::variables_map vm;
  try {
    po::store(po::parse_command_line(argc, argv, desc), vm);
    po::notify(vm);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "engine_eval: %s\n", e.what());
    return 2;
  }
  if (vm.count("help") || map_dir.empty() || drives.empty()) {
    std::cout << desc << "\n";
    return vm.count("help") ? 0 : 2;
  }
  if (survey_error != "correlated" && survey_error != "white") {
    std::fprintf(stderr, "engine_eval: --survey-error must be correlated or white\n");
    return 2;
  }
  if (survey_error == "white") lo.survey_error = sightfix::SurveyError::kWhite;
  if (method == "points") lo.method = sightfix::PoseMethod::kPoints;
  if (method == "pair") lo.method = sightfix::PoseMethod::kPair;
  eo.prior = prior == "none" ? sightfix::PriorMode::kNone : sightfix::PriorMode::kNoisy;
  auto loc = sightfix::Localizer::Open(map_dir, lo);
  if (!loc.ok()) {
    std::fprintf(stderr, "engine_eval: %s\n", loc.status().ToString().c_str());
    return 1;
  }
  std::ofstream rows;
  if (!csv.empty()) {
    rows.open(csv);
    rows << "drive,image,quality,method,error_m,heading_error_deg,radius95_m,nees,inliers,"
            "first_hit_rank,total_ms,reason\n";
  }
  std::vector<sightfix::QueryResult> all;
  for (const std::string& d : drives) {
    eo.drive_dir = d;
    auto r = sightfix::RunDrive(**loc, eo);
    if (!r.ok()) {
      std::fprintf(stderr, "engine_eval: %s\n", r.status().ToString().c_str());
      return 1;
    }
    std::printf("%s [%s, %s]: %s\n", d.c_str(), prior.c_str(), method.c_str(),
                sightfix::SummaryLine(sightfix::Summarize(*r)).c_str());
    for (const auto& q : *r) {
      if (rows.is_open())
        rows << d << "," << q.truth.image << "," << sightfix::FixQualityName(q.fix.quality) << ","
             << q.fix.method << "," << q.error_m << "," << q.heading_error_deg << ","
             << q.fix.radius95_m << "," << q.nees << "," << q.fix.pnp_inliers << ","
             << q.first_hit_rank << "," << q.fix.timings.total_ms << ",\"" << q.fix.reason
             << q.error << "\"\n";
      all.push_back(q);
    }
  }
  if (drives.size() > 1)
    std::printf("all [%s, %s]: %s\n", prior.c_str(), method.c_str(),
                sightfix::SummaryLine(sightfix::Summarize(all)).c_str());
  return 0;
}
