// sightfix replay: a query drive with ground truth through a map or a server, measured, with a
// report folder.
#include <algorithm>
#include <array>
#include <atomic>
#include <csignal>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "client/cli/command_support.h"
#include "client/cli/commands.h"
#include "client/eval/integrity.h"
#include "client/eval/protection_evidence.h"
#include "client/eval/route_eval.h"
#include "client/eval/route_report.h"
#include "client/monitor/gnss_stream.h"
#include "indexer/base/progress.h"
#include "server/wire/wire.h"

namespace sightfix::cli {
namespace {

struct ReplayFlags {
  SourceFlags source;
  std::string drive, out, prior = "noisy:150", gnss_path, spoof_path, alert_limits;
  int limit = 0, jobs = 2;
  uint64_t seed = 1;
  double segment_m = SummaryOptions{}.segment_length_m;
};

po::options_description ReplayOptions(ReplayFlags* f) {
  f->source.deadline_ms = 30000;
  po::options_description desc(
      "sightfix replay: sends every query image of a drive with ground truth (drive.csv) to a\n"
      "map (in this process) or a sightfix-server, and measures the answers with the field's\n"
      "metrics: recall@1/5/10 within 25 m, error percentiles, pose bins (0.25 m, 2 deg) (0.5 m,\n"
      "5 deg) (5 m, 10 deg), radius95 coverage, NEES, latency, integrity (fixes beyond their\n"
      "radius95 and beyond 3 x radius95, with a bound over street segments); and runs the GNSS\n"
      "spoofing monitor over the drive's gnss.csv. 95 % intervals read street segments of\n"
      "--segment-m metres driven as the independent units. Writes summary.json, fixes.csv,\n"
      "segments.csv, route.geojson and report.html into --out. Ctrl-C stops early and still\n"
      "writes what ran, marked partial.\n\n"
      "Usage: sightfix replay (--server HOST:PORT | --map MAPDIR) --drive QUERYDIR --out "
      "REPORTDIR\n       [--prior none|noisy:RADIUS_M|gnss] [--gnss FILE] [--limit N] [--seed N]\n"
      "       [--segment-m M] [--alert-limits H[,LATERAL,LONGITUDINAL]]"
      "\n\nOptions");
  desc.add_options()("help,h", "show this help");
  AddSourceOptions(&desc, &f->source);
  desc.add_options()("drive", po::value(&f->drive),
                     "query drive folder (drive.csv with truth, images, calibration)")(
      "out", po::value(&f->out), "report folder (created; files in it are replaced)")(
      "prior", po::value(&f->prior),
      "none: no prior (global); noisy:R: circle of radius R m centred uniformly within R of the "
      "truth; gnss: circle from the drive's GNSS stream, 2.45 claimed sigmas (95 %), a query "
      "left without a refined fix asked again without prior (default noisy:150)")(
      "gnss", po::value(&f->gnss_path), "GNSS stream (default QUERYDIR/gnss.csv when present)")(
      "spoofing", po::value(&f->spoof_path),
      "true spoofed spans, to score the monitor (default QUERYDIR/spoofing.csv when present)")(
      "limit", po::value(&f->limit), "first N queries only (0: all)")(
      "seed", po::value(&f->seed),
      "seed of the noisy prior's centres (1; with --prior noisy:R only)")(
      "jobs", po::value(&f->jobs), "queries in flight (2)")(
      "segment-m", po::value(&f->segment_m),
      "length of the street segments, metres driven along the truth track (50): the blocks of "
      "every interval's bootstrap and the trials of the integrity bound")(
      "alert-limits", po::value(&f->alert_limits),
      "H or H,LATERAL,LONGITUDINAL metres every fix is judged usable at (default: the map's, "
      "2 m horizontal); the place checks run only for fixes usable there, so the availability "
      "reported at a wider limit is an upper bound: ask for the widest you will read")(
      "deadline-ms", po::value(&f->source.deadline_ms),
      "deadline of each call to the server (30000; with --server only)")(
      "json", "print summary.json on stdout instead of the text summary");
  return desc;
}

// The optional GNSS stream and spoofing truth of a drive; a file given but unreadable is an
// error, a default one missing is not.
Status LoadGnss(const ReplayFlags& f, const po::variables_map& vm, RouteReport* report) {
  namespace fs = std::filesystem;
  if (vm.count("gnss") || fs::exists(f.gnss_path)) {
    Result<std::vector<GnssFix>> g = ReadGnssCsv(f.gnss_path);
    if (!g.ok()) return g.status();
    report->gnss = std::move(g).value();
  }
  if (vm.count("spoofing") || fs::exists(f.spoof_path)) {
    Result<std::vector<SpoofedSpan>> t = ReadSpoofingCsv(f.spoof_path);
    if (!t.ok()) return t.status();
    report->spoof_truth = std::move(t).value();
  }
  return Status::Ok();
}

// The evaluator's options and the report's header from the flags; the drive's GNSS files and
// the number of queries to run. Returns kGoOn or 2.
int PrepareReplay(ReplayFlags* f, const po::variables_map& vm, RouteEvalOptions* o,
                  RouteReport* report, long* total) {
  if (!ParsePriorMode(f->prior, o)) return Fail("--prior must be none, noisy:RADIUS_M or gnss", 2);
  if (vm.count("seed") && o->prior != PriorMode::kNoisy)
    return Fail("--seed applies to --prior noisy:R only: the other modes draw nothing", 2);
  SummaryOptions summary_options;
  summary_options.segment_length_m = f->segment_m;
  if (Status s = summary_options.Validate(); !s.ok())
    return Fail("--segment-m must be a number of metres > 0", 2);
  if (!f->alert_limits.empty() && !ParseAlertLimits(f->alert_limits, &o->integrity))
    return Fail(kAlertLimitsForm, 2);
  if (std::string e; !o->integrity.Validate(&e)) return Fail("--alert-limits: " + e, 2);
  o->drive_dir = report->drive_dir = f->drive;
  o->seed = report->seed = f->seed;
  o->limit = f->limit;
  o->jobs = std::max(1, f->jobs);
  report->prior = f->prior;
  if (!vm.count("gnss")) f->gnss_path = f->drive + "/gnss.csv";
  if (!vm.count("spoofing")) f->spoof_path = f->drive + "/spoofing.csv";
  o->gnss_csv = f->gnss_path;
  if (Status s = LoadGnss(*f, vm, report); !s.ok()) return Fail(s.ToString(), 2);
  if (o->prior == PriorMode::kGnss && report->gnss.empty())
    return Fail("--prior gnss needs a GNSS stream: " + f->gnss_path + " is missing", 2);
  Result<std::vector<DriveRow>> rows = ReadDriveManifest(f->drive + "/drive.csv");
  if (!rows.ok()) return Fail(rows.status().ToString(), 2);
  const long n = static_cast<long>(rows->size());
  *total = f->limit > 0 ? std::min<long>(f->limit, n) : n;
  return kGoOn;
}

// What answers the queries: a server's client or a map's localizer, and the call to it.
struct ReplaySource {
  std::unique_ptr<Client> client;
  std::unique_ptr<Localizer> localizer;
  LocateFn locate;
};

int OpenServer(const SourceFlags& flags, ReplaySource* source, RouteReport* report) {
  auto c = ConnectTo(flags);
  if (!c.ok()) return Fail(c.status().ToString(), 1);
  source->client = std::move(c).value();
  Result<v1::DescribeResponse> d = source->client->Describe(5000);
  if (!d.ok()) return Fail(d.status().ToString(), 1);
  report->map_version = d->map_version();
  report->model_id = d->model_id();
  report->source = "server " + flags.server;
  source->locate = [client = source->client.get(), deadline_ms = flags.deadline_ms](
                       const LocateRequest& req, const std::string& bytes) {
    return FixFromProto(client->Locate(RequestToProto(bytes, req.camera, req), deadline_ms));
  };
  return kGoOn;
}

int OpenMap(const SourceFlags& flags, ReplaySource* source, RouteReport* report) {
  auto l = Localizer::Open(flags.map_dir, LocalizerOptions{});
  if (!l.ok()) return Fail(l.status().ToString(), 2);
  source->localizer = std::move(l).value();
  report->map_version = source->localizer->catalog().map_version;
  report->model_id = source->localizer->catalog().model_id;
  report->source = "map " + flags.map_dir;
  source->locate = InProcess(*source->localizer);
  return kGoOn;
}

std::atomic<bool> g_stop{false};
extern "C" void OnInterrupt(int) {
  g_stop = true;
  std::signal(SIGINT, SIG_DFL);  // a second Ctrl-C ends the process at once
}

// Runs the drive with progress on stderr (Ctrl-C stops taking queries), then scores it and runs
// the spoofing monitor. Returns kGoOn or 2.
int RunReplay(const LocateFn& locate, long total, const SummaryOptions& summary_options,
              RouteEvalOptions* o, RouteReport* report) {
  std::signal(SIGINT, OnInterrupt);
  o->stop = &g_stop;
  Progress progress("queries", total);
  o->on_query_done = [&progress] { progress.Advance(); };
  Result<std::vector<QueryResult>> results = RunDrive(locate, *o);
  progress.Finish();
  std::signal(SIGINT, SIG_DFL);
  if (!results.ok()) return Fail(results.status().ToString(), 2);
  report->partial = g_stop.load();
  report->results = std::move(results).value();
  report->summary = Summarize(report->results, summary_options);
  if (!report->gnss.empty())
    report->spoofing =
        MonitorDrive(report->results, report->gnss, report->spoof_truth, report->monitor);
  return kGoOn;
}

void PrintSpoofing(const SpoofingRun& run) {
  const SpoofingScore& sc = run.score;
  std::printf("GNSS spoofing monitor: %zu checks, %d of %d spoofed segments flagged",
              run.steps.size(), sc.segments_flagged, sc.segments_true);
  if (!sc.detection_delays_s.empty())
    std::printf(" (median delay %.1f s)", Percentile(sc.detection_delays_s, 0.5));
  std::printf(", %d false alarms\n", sc.false_alarms);
}

// A rate and its interval: "0.967 [0.833, 0.994]".
std::string Rate(double value, const std::optional<Interval>& ci) {
  char buf[32];
  std::snprintf(buf, sizeof(buf), "%.3f", value);
  return buf + IntervalText(ci, 1, "%.3f");
}

// A distance and its interval: "0.014 m [0.011, 0.019]".
std::string Metres(double value, const std::optional<Interval>& ci) {
  char buf[32];
  std::snprintf(buf, sizeof(buf), "%.3f m", value);
  return buf + IntervalText(ci, 1, "%.3f");
}

void PrintErrors(const RouteSummary& s) {
  const ErrorStats& a = s.all;
  std::printf(
      "error over fixes: median %s, p90 %.3f m, p95 %s, max %.3f m; median |along| %s, "
      "|cross| %s\n",
      Metres(a.median_m, a.median_m_ci95).c_str(), a.p90_m, Metres(a.p95_m, a.p95_m_ci95).c_str(),
      a.max_m, Metres(a.median_abs_along_m, a.median_abs_along_m_ci95).c_str(),
      Metres(a.median_abs_cross_m, a.median_abs_cross_m_ci95).c_str());
  std::printf(
      "error over refined fixes: median %s, p95 %s; median |along| %s, |cross| %s; wrong "
      "refined %d (share of refined %s)\n",
      Metres(s.median_error_m, s.median_error_m_ci95).c_str(),
      Metres(s.p95_error_m, s.p95_error_m_ci95).c_str(),
      Metres(s.median_abs_along_track_m, s.median_abs_along_track_m_ci95).c_str(),
      Metres(s.median_abs_cross_track_m, s.median_abs_cross_track_m_ci95).c_str(), s.wrong_refined,
      Rate(s.wrong_refined_share, s.wrong_refined_share_ci95).c_str());
}

void PrintReplaySummary(const RouteReport& r, const std::string& out) {
  const RouteSummary& s = r.summary;
  std::printf(
      "%s%d queries, %d fixes (availability %s; refined %d, share %s; coarse %d, none %d)\n",
      r.partial ? "PARTIAL (interrupted): " : "", s.queries, s.fixes,
      Rate(s.availability, s.availability_ci95).c_str(), s.refined,
      Rate(s.refined_share, s.refined_share_ci95).c_str(), s.coarse, s.none);
  std::printf("funnel, where queries stopped: %s\n", FunnelLine(s.funnel).c_str());
  std::printf("recall@1/5/10 within 25 m: %s / %s / %s\n",
              Rate(s.recall_at_1, s.recall_at_1_ci95).c_str(),
              Rate(s.recall_at_5, s.recall_at_5_ci95).c_str(),
              Rate(s.recall_at_10, s.recall_at_10_ci95).c_str());
  PrintErrors(s);
  const std::array<double, 3> shares = PoseBinShares(s);
  for (size_t k = 0; k < shares.size(); ++k)
    std::printf("pose %s: %s of queries\n", PoseBinLabel(kPoseBins[k]).c_str(),
                Rate(shares[k], s.pose_bin_ci95[k]).c_str());
  std::printf("heading error median %.2f deg\n", s.all.median_heading_deg);
  std::printf("radius95 coverage %s, NEES %.2f; latency p50 %.0f ms, p95 %.0f ms, p99 %.0f ms\n",
              Rate(s.all.radius95_coverage, s.all.radius95_coverage_ci95).c_str(), s.all.nees_mean,
              s.latency_ms_p50, s.latency_ms_p95, s.latency_ms_p99);
  std::printf("integrity, %s\n", IntegrityLine(s.misleading).c_str());
  std::printf("integrity, %s\n", IntegrityLine(s.confidently_wrong).c_str());
  std::printf("integrity, %s\n", ProtectionLines(s.protection).c_str());
  std::printf("integrity, %s\n", OverboundLine(s.protection, r.drive_dir).c_str());
  std::printf("%s\n", IntervalLegend(s).c_str());
  if (r.spoofing) PrintSpoofing(*r.spoofing);
  std::printf(
      "report: %s/report.html (summary.json, fixes.csv, segments.csv, route.geojson beside "
      "it)\n%s\n",
      out.c_str(), kSafety);
}

}  // namespace

int Replay(int argc, char** argv) {
  ReplayFlags f;
  const po::options_description desc = ReplayOptions(&f);
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "replay", desc, {}, &vm); rc != kGoOn) return rc;
  if (f.source.map_dir.empty() == f.source.server.empty() || f.drive.empty() || f.out.empty())
    return Fail("replay needs --map or --server, --drive and --out (see sightfix replay --help)",
                2);
  if (int rc = RefuseServerFlagsWithMap(f.source, vm); rc != kGoOn) return rc;
  RouteEvalOptions o;
  RouteReport report;
  long total = 0;
  if (int rc = PrepareReplay(&f, vm, &o, &report, &total); rc != kGoOn) return rc;
  ReplaySource source;
  if (int rc = f.source.server.empty() ? OpenMap(f.source, &source, &report)
                                       : OpenServer(f.source, &source, &report);
      rc != kGoOn)
    return rc;
  SummaryOptions summary_options;
  summary_options.segment_length_m = f.segment_m;
  if (int rc = RunReplay(source.locate, total, summary_options, &o, &report); rc != kGoOn)
    return rc;
  if (Status s = WriteRouteReport(report, f.out); !s.ok()) return Fail(s.ToString(), 1);
  if (vm.count("json"))
    std::cout << SummaryJson(report).dump(2) << "\n";
  else
    PrintReplaySummary(report, f.out);
  if (report.summary.failed_calls > 0)
    std::fprintf(stderr, "sightfix: %d calls failed (see the reason column of fixes.csv)\n",
                 report.summary.failed_calls);
  return report.partial ? 130 : 0;
}

}  // namespace sightfix::cli
