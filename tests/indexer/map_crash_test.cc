// Crash safety and I/O faults of `add` and `retrain` (map_builder.h, docs/design.md 4.6), injected
// through the Env (indexer/base/env.h). A forked child runs the library's add or retrain with an
// Env that raises SIGKILL at one point of the publication:
//   - after the N-th new tile file's rename (tile:N),
//   - before the catalog's rename (catalog),
//   - after the catalog's rename, before the first removal of an old file (cleanup);
// the parent checks the child died of SIGKILL, the map verifies (VerifyMap), and its version and
// answers: a kill before the switch leaves the previous map answering three query images exactly
// as the untouched map does; a kill after it leaves the new map whole. Failing renames and fsyncs
// (kIoError from the Env) leave the map byte for byte as it was, with no temporary file.
//
// The parent stays single-threaded: everything that starts thread pools (the builder, the
// engine) runs in a forked child, so each fork copies a process without worker threads.
// Needs the service tests' small map: SIGHTFIX_SERVICE_DATA (map/ and town/).
#include <gtest/gtest.h>
#include <sys/wait.h>
#include <unistd.h>

#include <csignal>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <functional>
#include <map>
#include <opencv2/imgcodecs.hpp>
#include <sstream>
#include <string>

#include "indexer/base/env.h"
#include "indexer/base/sha256.h"
#include "indexer/builder/map_builder.h"
#include "indexer/map/map_inspect.h"
#include "indexer/map/map_store.h"
#include "server/engine/localizer.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

// Where a FaultEnv strikes.
enum class Fault {
  kKillAfterTileRename,      // SIGKILL right after the N-th tile file is renamed into place
  kKillBeforeCatalogRename,  // SIGKILL just before the catalog's rename
  kKillBeforeFirstRemoval,   // SIGKILL after the catalog's rename, before the first removal
  kFailCatalogRename,        // the catalog's rename returns kIoError
  kFailTileRename,           // the N-th tile file's rename returns kIoError
  kFailTileSync,             // the N-th tile file's fsync returns kIoError
};

bool IsCatalog(const std::string& path) { return fs::path(path).filename() == "catalog.sqlite"; }
bool IsTile(const std::string& path) { return path.find("/tiles/") != std::string::npos; }

class FaultEnv : public EnvWrapper {
 public:
  FaultEnv(Fault fault, int nth) : EnvWrapper(Env::Default()), fault_(fault), nth_(nth) {}

  Status RenameFile(const std::string& from, const std::string& to) override {
    if (IsCatalog(to)) return RenameCatalog(from, to);
    if (IsTile(to) && ++tile_renames_ == nth_ && fault_ == Fault::kFailTileRename)
      return Status::IoError("injected: cannot rename " + from);
    Status s = target()->RenameFile(from, to);
    if (s.ok() && IsTile(to) && tile_renames_ == nth_ && fault_ == Fault::kKillAfterTileRename)
      std::raise(SIGKILL);
    return s;
  }

  Status SyncFile(const std::string& path) override {
    if (IsTile(path) && ++tile_syncs_ == nth_ && fault_ == Fault::kFailTileSync)
      return Status::IoError("injected: fsync failed on " + path);
    return target()->SyncFile(path);
  }

  Status RemoveFile(const std::string& path) override {
    if (catalog_switched_ && fault_ == Fault::kKillBeforeFirstRemoval) std::raise(SIGKILL);
    return target()->RemoveFile(path);
  }

 private:
  Status RenameCatalog(const std::string& from, const std::string& to) {
    if (fault_ == Fault::kKillBeforeCatalogRename) std::raise(SIGKILL);
    if (fault_ == Fault::kFailCatalogRename)
      return Status::IoError("injected: cannot rename " + from);
    Status s = target()->RenameFile(from, to);
    catalog_switched_ = s.ok();
    return s;
  }

  Fault fault_;
  int nth_;
  int tile_renames_ = 0, tile_syncs_ = 0;
  bool catalog_switched_ = false;
};

// Runs FN in a forked child that exits with FN's return value; returns waitpid's status.
int RunInChild(const std::function<int()>& fn) {
  std::fflush(nullptr);
  const pid_t pid = fork();
  if (pid == 0) _exit(fn());
  int status = 0;
  waitpid(pid, &status, 0);
  return status;
}

bool DiedOfSigkill(int status) { return WIFSIGNALED(status) && WTERMSIG(status) == SIGKILL; }
bool ExitedZero(int status) { return WIFEXITED(status) && WEXITSTATUS(status) == 0; }

std::string DataDir() {
  const char* d = std::getenv("SIGHTFIX_SERVICE_DATA");
  return d ? d : "";
}

std::string ReadText(const std::string& path) {
  std::ifstream in(path);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

// Each file of a map folder (relative path) with its SHA-256; not the writer lock (map_lock.h),
// which every writer creates and stamps, as disk_faults_test's snapshot leaves it out too.
std::map<std::string, std::string> Snapshot(const std::string& dir) {
  std::map<std::string, std::string> files;
  for (const auto& e : fs::recursive_directory_iterator(dir))
    if (e.is_regular_file() && e.path().filename() != ".writer.lock")
      files[fs::relative(e.path(), dir).string()] = Sha256OfFile(e.path().string()).value();
  return files;
}

bool HasTemporaryFile(const std::string& dir) {
  for (const auto& e : fs::recursive_directory_iterator(dir))
    if (e.path().filename().string().find(".tmp") != std::string::npos) return true;
  return false;
}

class MapCrashTest : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    if (DataDir().empty()) return;
    root_ = ::testing::TempDir() + "/map_crash_test";
    fs::remove_all(root_);
    fs::create_directories(root_);
    MakeEastDrive();
    base_answers_ = Answers(DataDir() + "/map");
  }

  void SetUp() override {
    if (DataDir().empty()) GTEST_SKIP() << "SIGHTFIX_SERVICE_DATA is not set";
  }

  // A new drive lying in the east tile only (the map has two, split at -39.999847): the
  // query-day rows east of -39.99983.
  static void MakeEastDrive() {
    const fs::path day = fs::path(DataDir()) / "town/query-day";
    const fs::path east = fs::path(root_) / "east";
    fs::create_directories(east);
    fs::copy(day / "camera.yml", east / "camera.yml");
    fs::copy(day / "images", east / "images", fs::copy_options::recursive);
    std::ifstream in(day / "drive.csv");
    std::ofstream out(east / "drive.csv");
    std::string line;
    int rows = 0;
    for (bool header = true; std::getline(in, line); header = false) {
      std::stringstream fields(line);
      std::string field;
      for (int i = 0; i < 4; ++i) std::getline(fields, field, ',');
      if (header || std::atof(field.c_str()) > -39.99983) {
        out << line << "\n";
        rows += header ? 0 : 1;
      }
    }
    east_rows_ = rows;
  }

  // A fresh copy of the service map.
  static std::string CopyOfMap(const std::string& name) {
    const std::string dir = root_ + "/" + name;
    fs::remove_all(dir);
    fs::copy(DataDir() + "/map", dir, fs::copy_options::recursive);
    return dir;
  }

  static BuildOptions AddOptions(const std::string& map_dir, Env* env) {
    BuildOptions o;
    o.drive_dir = root_ + "/east";
    o.map_dir = map_dir;
    o.progress = false;
    o.env = env;
    return o;
  }

  // The child's run of add (or retrain) on MAP_DIR with FAULT striking at the N-th tile;
  // exits 0 when the call succeeded, 1 when it returned an error (its message in
  // MAP_DIR.status).
  static int RunUpdate(bool retrain, const std::string& map_dir, Fault fault, int nth) {
    return RunInChild([=] {
      FaultEnv env(fault, nth);
      const BuildOptions o = AddOptions(map_dir, &env);
      Result<BuildSummary> s = retrain ? RetrainMap(o) : AddToMap(o);
      std::ofstream(map_dir + ".status") << (s.ok() ? "OK" : s.status().ToString());
      return s.ok() ? 0 : 1;
    });
  }

  // The engine's answers on three query images (quality and position to 1e-10 degrees), one
  // line each, computed in a child.
  static std::string Answers(const std::string& map_dir) {
    const std::string out = root_ + "/" + fs::path(map_dir).filename().string() + ".answers";
    const int status = RunInChild([&] {
      Result<std::unique_ptr<Localizer>> localizer = Localizer::Open(map_dir, LocalizerOptions{});
      if (!localizer.ok()) return 1;
      const std::string town = DataDir() + "/town/query-overcast";
      Result<CameraModel> camera = LoadCameraModel(town + "/camera.yml");
      if (!camera.ok()) return 1;
      std::ofstream file(out);
      for (const char* image : {"000004", "000012", "000020"}) {
        LocateRequest request;
        request.camera = *camera;
        request.image = cv::imread(town + "/images/" + image + ".jpg", cv::IMREAD_GRAYSCALE);
        Result<Fix> fix = (*localizer)->Locate(request);
        if (!fix.ok()) return 1;
        const bool none = fix->quality == FixQuality::kNone;
        char line[128];
        std::snprintf(line, sizeof(line), "%s %.10f %.10f\n", FixQualityName(fix->quality),
                      none ? 0.0 : fix->lat_deg, none ? 0.0 : fix->lon_deg);
        file << line;
      }
      return 0;
    });
    EXPECT_TRUE(ExitedZero(status)) << "answers of " << map_dir;
    return ReadText(out);
  }

  static int MapVersion(const std::string& map_dir) {
    Result<Catalog> c = ReadCatalog(map_dir + "/catalog.sqlite");
    return c.ok() ? c->map_version : -1;
  }

  static void ExpectWhole(const std::string& map_dir) {
    const VerifyReport report = VerifyMap(map_dir);
    EXPECT_TRUE(report.whole()) << map_dir << ": " << report.problems.size() << " problems, first: "
                                << (report.problems.empty() ? "" : report.problems[0].what);
  }

  // A kill before the switch: the previous map, verifying, answering as the untouched map.
  void ExpectKilledBeforeSwitch(bool retrain, Fault fault, const std::string& name) {
    const std::string map_dir = CopyOfMap(name);
    ASSERT_TRUE(DiedOfSigkill(RunUpdate(retrain, map_dir, fault, 1)))
        << name << ": " << ReadText(map_dir + ".status");
    ExpectWhole(map_dir);
    EXPECT_EQ(MapVersion(map_dir), 1);
    EXPECT_EQ(Answers(map_dir), base_answers_);
  }

  // A failed write: kIoError, the map byte for byte as it was, no temporary file left.
  void ExpectFailedUnchanged(bool retrain, Fault fault, int nth, const std::string& name) {
    const std::string map_dir = CopyOfMap(name);
    const auto before = Snapshot(map_dir);
    const int status = RunUpdate(retrain, map_dir, fault, nth);
    EXPECT_TRUE(WIFEXITED(status) && WEXITSTATUS(status) == 1) << name << " status " << status;
    EXPECT_NE(ReadText(map_dir + ".status").find("injected"), std::string::npos)
        << ReadText(map_dir + ".status");
    EXPECT_EQ(Snapshot(map_dir), before) << name;
    EXPECT_FALSE(HasTemporaryFile(map_dir)) << name;
  }

  static std::string root_;
  static std::string base_answers_;
  static int east_rows_;
};

std::string MapCrashTest::root_;
std::string MapCrashTest::base_answers_;
int MapCrashTest::east_rows_ = 0;

TEST_F(MapCrashTest, BaseMapAnswers) {
  EXPECT_GE(east_rows_, 3);
  EXPECT_NE(base_answers_.find("refined"), std::string::npos) << base_answers_;
}

TEST_F(MapCrashTest, AddKilledAfterFirstTileFile) {
  ExpectKilledBeforeSwitch(false, Fault::kKillAfterTileRename, "add_tile1");
}

TEST_F(MapCrashTest, AddKilledBeforeCatalogSwitch) {
  ExpectKilledBeforeSwitch(false, Fault::kKillBeforeCatalogRename, "add_catalog");
}

TEST_F(MapCrashTest, AddKilledAfterSwitchBeforeCleanup) {
  const std::string map_dir = CopyOfMap("add_cleanup");
  ASSERT_TRUE(DiedOfSigkill(RunUpdate(false, map_dir, Fault::kKillBeforeFirstRemoval, 1)))
      << ReadText(map_dir + ".status");
  ExpectWhole(map_dir);
  EXPECT_EQ(MapVersion(map_dir), 2);  // the new map, whole
}

TEST_F(MapCrashTest, RetrainKilledAfterFirstTileFile) {
  ExpectKilledBeforeSwitch(true, Fault::kKillAfterTileRename, "retrain_tile1");
}

TEST_F(MapCrashTest, RetrainKilledBeforeCatalogSwitch) {
  ExpectKilledBeforeSwitch(true, Fault::kKillBeforeCatalogRename, "retrain_catalog");
}

TEST_F(MapCrashTest, AddWithFailingTileRenameLeavesMapUnchanged) {
  ExpectFailedUnchanged(false, Fault::kFailTileRename, 1, "add_fail_tile");
}

TEST_F(MapCrashTest, AddWithFailingCatalogRenameLeavesMapUnchanged) {
  ExpectFailedUnchanged(false, Fault::kFailCatalogRename, 1, "add_fail_catalog");
}

TEST_F(MapCrashTest, RetrainWithFailingSecondTileSyncLeavesMapUnchanged) {
  ExpectFailedUnchanged(true, Fault::kFailTileSync, 2, "retrain_fail_sync");
}

}  // namespace
}  // namespace sightfix
