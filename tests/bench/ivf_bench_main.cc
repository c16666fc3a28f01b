// ivf_bench: the map-wide IVF-PQ index (indexer/map/ivf_index.h) at a million images, against exact
// search, on descriptors of the demo town (scripts/bench.sh; not a test, it prints).
//
// Data. Database: the whitened global descriptors (VLAD over RootSIFT, PCA-whitened, the map's
// own model) of every survey image of a built map, each with its surveyed position, plus
// distractors up to --n: each a survey descriptor under a seeded random signed permutation of
// its dimensions with Gaussian noise (10 % of its norm), rescaled to the source's norm. Whitened
// dimensions have unit variance each, so a distractor has the statistics of a real descriptor
// and belongs to no place of the town: a stand-in for the rest of a country. (Real distractors
// have structure, similar-looking streets, that this does not model: the figures measure how
// faithful the index is to exact search, not place recognition at country scale.) Queries:
// every image of the given query drives (held out: other passes, other light), described the
// same way, with their ground-truth positions.
//
// Measures. recall@1: the share of queries whose nearest database entry is a survey image
// within 25 m of the query's true position (the threshold of the place-recognition literature,
// e.g. Arandjelovic et al., NetVLAD, CVPR 2016; common practice). Exact search: FAISS
// IndexFlatL2 over the float vectors. The IVF-PQ index: trained once, filled as --shards
// region shards, merged into on-disk lists (OnDiskInvertedLists), loaded memory-mapped; per
// nprobe: recall@1, its ratio to exact, top-1 agreement with exact, ms per query (one query at a
// time, one thread: latency), with and without re-ranking --rerank PQ candidates by their exact
// distances (vectors memory-mapped from disk), and memory (the process's anonymous and file-backed
// resident bytes before and after loading and querying). Also the flat PQ index the catalog holds
// today (exhaustive asymmetric distance over every code) at the same size, for comparison.
//
// Usage: ivf_bench --map MAPDIR --queries DIR[,DIR...] --out DIR [--n 1000000] [--nlist 4096]
//                  [--pq-bytes 32] [--shards 4] [--seed 1]
#include <faiss/IndexFlat.h>
#include <faiss/IndexFlatCodes.h>
#include <faiss/IndexIVFPQ.h>
#include <omp.h>

#include <algorithm>
#include <boost/program_options.hpp>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <numeric>
#include <opencv2/imgcodecs.hpp>
#include <random>
#include <sstream>

#include "indexer/base/geo.h"
#include "indexer/base/parallel.h"
#include "indexer/base/threads.h"
#include "indexer/map/drive_manifest.h"
#include "indexer/map/ivf_index.h"
#include "indexer/map/map_store.h"
#include "indexer/vision/global_descriptor.h"
#include "indexer/vision/local_features.h"

namespace po = boost::program_options;
namespace fs = std::filesystem;
using Clock = std::chrono::steady_clock;
using json = nlohmann::json;

namespace {

double Seconds(Clock::time_point t0) {
  return std::chrono::duration<double>(Clock::now() - t0).count();
}

// Resident memory of this process from /proc/self/status, in MB: anonymous and file-backed.
std::pair<double, double> ResidentMb() {
  std::ifstream in("/proc/self/status");
  double anon = 0, file = 0;
  for (std::string line; std::getline(in, line);) {
    std::istringstream s(line);
    std::string key;
    double kb = 0;
    s >> key >> kb;
    if (key == "RssAnon:") anon = kb / 1024;
    if (key == "RssFile:") file = kb / 1024;
  }
  return {anon, file};
}

struct Described {
  cv::Mat vectors;  // n x dims, whitened
  std::vector<sightfix::GeoPoint> positions;
};

Described SurveyOf(const std::string& map_dir, const sightfix::Catalog& catalog,
                   const sightfix::GlobalDescriptor& model) {
  Described d;
  std::vector<cv::Mat> descriptors;
  for (const sightfix::CatalogTile& t : catalog.tiles) {
    auto tile = sightfix::ReadTile(map_dir + "/" + t.file);
    if (!tile.ok()) throw std::runtime_error(tile.status().ToString());
    for (const sightfix::ReferenceImage& img : tile->images) {
      cv::Mat f;
      img.descriptors.convertTo(f, CV_32F, 1.0 / sightfix::kRootSiftByteScale);
      descriptors.push_back(f);
      d.positions.push_back(img.position);
    }
  }
  d.vectors = model.Whiten(model.VladRows(descriptors));
  return d;
}

Described QueriesOf(const std::vector<std::string>& dirs, const sightfix::GlobalDescriptor& model) {
  Described d;
  std::vector<cv::Mat> descriptors;
  for (const std::string& dir : dirs) {
    auto rows = sightfix::ReadDriveManifest(dir + "/drive.csv");
    auto cam = sightfix::LoadCameraModel(dir + "/camera.yml");
    if (!rows.ok() || !cam.ok()) throw std::runtime_error("cannot read the query drive " + dir);
    std::vector<cv::Mat> local(rows->size());
    sightfix::ParallelFor(static_cast<int>(rows->size()), sightfix::ThreadCount(0), [&](int i) {
      const cv::Mat img = cv::imread(dir + "/" + (*rows)[i].image, cv::IMREAD_GRAYSCALE);
      auto f = sightfix::ExtractFeatures(img, &*cam, sightfix::FeatureOptions{});
      if (f.ok()) local[i] = f->descriptors;
    });
    for (size_t i = 0; i < rows->size(); ++i) {
      if (local[i].empty()) continue;
      descriptors.push_back(local[i]);
      d.positions.push_back((*rows)[i].position);
    }
  }
  d.vectors = model.Whiten(model.VladRows(descriptors));
  return d;
}

// The database: survey rows first, then distractors up to n.
std::vector<float> Database(const cv::Mat& survey, int64_t n, uint64_t seed) {
  const int dims = survey.cols;
  std::vector<float> db(static_cast<size_t>(n) * dims);
  for (int i = 0; i < survey.rows; ++i)
    std::copy(survey.ptr<float>(i), survey.ptr<float>(i) + dims, db.begin() + i * dims);
  std::mt19937_64 rng(seed);
  std::normal_distribution<float> gauss(0, 1);
  std::vector<int> perm(dims);
  std::vector<float> sign(dims);
  for (int64_t i = survey.rows; i < n; ++i) {
    if ((i - survey.rows) % survey.rows == 0) {  // a new signed permutation per pass
      std::iota(perm.begin(), perm.end(), 0);
      std::shuffle(perm.begin(), perm.end(), rng);
      for (float& s : sign) s = (rng() & 1) ? 1.0f : -1.0f;
    }
    const float* src = survey.ptr<float>(static_cast<int>((i - survey.rows) % survey.rows));
    float* out = db.data() + i * dims;
    double src_norm = 0, out_norm = 0;
    for (int k = 0; k < dims; ++k) src_norm += double(src[k]) * src[k];
    src_norm = std::sqrt(src_norm);
    const float noise = 0.1f * static_cast<float>(src_norm / std::sqrt(dims));
    for (int k = 0; k < dims; ++k) {
      out[k] = sign[k] * src[perm[k]] + noise * gauss(rng);
      out_norm += double(out[k]) * out[k];
    }
    const float scale = out_norm > 0 ? static_cast<float>(src_norm / std::sqrt(out_norm)) : 0.f;
    for (int k = 0; k < dims; ++k) out[k] *= scale;
  }
  return db;
}

// recall@1: top-1 is a survey row (id < survey_n) within 25 m of the truth.
double RecallAt1(const std::vector<faiss::Index::idx_t>& top1, const Described& survey,
                 const Described& queries) {
  int hit = 0;
  for (size_t q = 0; q < top1.size(); ++q) {
    const auto id = top1[q];
    if (id < 0 || id >= static_cast<faiss::Index::idx_t>(survey.positions.size())) continue;
    const sightfix::EnuFrame enu(queries.positions[q]);
    const cv::Vec3d p = enu.ToEnu(survey.positions[id]);
    hit += std::hypot(p[0], p[1]) <= 25.0;
  }
  return static_cast<double>(hit) / std::max<size_t>(1, top1.size());
}

// recall@k: one of the k best (rows of k ids) is a survey row within 25 m of the truth.
double RecallAtK(const std::vector<faiss::Index::idx_t>& ids, int k, const Described& survey,
                 const Described& queries) {
  int hit = 0;
  const size_t nq = ids.size() / k;
  for (size_t q = 0; q < nq; ++q) {
    const sightfix::EnuFrame enu(queries.positions[q]);
    for (int j = 0; j < k; ++j) {
      const auto id = ids[q * k + j];
      if (id < 0 || id >= static_cast<faiss::Index::idx_t>(survey.positions.size())) continue;
      const cv::Vec3d p = enu.ToEnu(survey.positions[id]);
      if (std::hypot(p[0], p[1]) <= 25.0) {
        ++hit;
        break;
      }
    }
  }
  return static_cast<double>(hit) / std::max<size_t>(1, nq);
}

const int kNprobes[] = {1, 2, 4, 8, 16, 32, 64, 128, 256, 512};

// --serve: a fresh process loads the index and answers the queries, so its memory and latency
// are the index's alone. Writes per nprobe the top-10 ids (binary) and a JSON line of figures.
int Serve(const std::string& index_file, const std::string& query_file, int dims, int rerank,
          const std::string& out) {
  sightfix::PinLibraryThreads();
  const std::string bytes = [&] {
    std::ifstream in(query_file, std::ios::binary);
    return std::string((std::istreambuf_iterator<char>(in)), {});
  }();
  const int nq = static_cast<int>(bytes.size() / (sizeof(float) * dims));
  const float* q = reinterpret_cast<const float*>(bytes.data());
  const auto start = ResidentMb();
  auto index = sightfix::IvfSearcher::Open(index_file);
  if (!index.ok()) return std::fprintf(stderr, "%s\n", index.status().ToString().c_str()), 1;
  const auto loaded = ResidentMb();
  json figures = json::array();
  std::ofstream ids_out(out + "/served_ids.bin", std::ios::binary);
  for (int nprobe : kNprobes)
    for (int r : {0, rerank}) {
      if (nprobe > static_cast<int>((*index)->index().nlist)) break;
      std::vector<int64_t> top10(nq * 10);
      std::vector<float> d10(nq * 10);
      std::vector<double> ms(nq);
      for (int i = 0; i < nq; ++i) {
        const auto tq = Clock::now();
        (*index)->Search(q + static_cast<size_t>(i) * dims, 10, nprobe, r, top10.data() + i * 10,
                         d10.data() + i * 10);
        ms[i] = 1000 * Seconds(tq);
      }
      ids_out.write(reinterpret_cast<const char*>(top10.data()), top10.size() * sizeof(top10[0]));
      std::vector<double> sorted = ms;
      std::sort(sorted.begin(), sorted.end());
      figures.push_back(
          {{"nprobe", nprobe},
           {"rerank", r},
           {"ms_per_query", std::accumulate(ms.begin(), ms.end(), 0.0) / nq},
           {"p99_ms", sorted[std::min<size_t>(nq - 1, static_cast<size_t>(0.99 * nq))]}});
    }
  const auto queried = ResidentMb();
  std::ofstream(out + "/served.json")
      << json{{"per_nprobe", figures},
              {"rss_anon_mb_loaded", loaded.first - start.first},
              {"rss_anon_mb_after_queries", queried.first - start.first},
              {"rss_file_mb_after_queries", queried.second - start.second},
              {"rss_total_mb_after_queries", queried.first + queried.second}}
             .dump()
      << "\n";
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  std::string map_dir, queries_arg, out, serve, query_file;
  int serve_dims = 0, rerank = 100;
  int64_t n = 1000000;
  int shards = 4;
  uint64_t seed = 1;
  sightfix::IvfOptions ivf;
  po::options_description desc("ivf_bench: IVF-PQ at a million images against exact search");
  desc.add_options()("help,h", "show this help")("map", po::value(&map_dir), "a built map")(
      "queries", po::value(&queries_arg), "query drive folders, comma-separated")(
      "out", po::value(&out), "folder for the index files and ivf_bench.json")(
      "n", po::value(&n)->default_value(n), "database size")(
      "nlist", po::value(&ivf.nlist)->default_value(ivf.nlist), "coarse cells")(
      "pq-bytes", po::value(&ivf.pq_bytes)->default_value(ivf.pq_bytes), "bytes per code")(
      "shards", po::value(&shards)->default_value(shards), "region shards merged on disk")(
      "seed", po::value(&seed)->default_value(seed), "distractor seed")(
      "rerank", po::value(&rerank)->default_value(rerank),
      "PQ candidates re-ranked with the exact vectors")(
      "serve", po::value(&serve), "internal: load this index and answer --query-file")(
      "query-file", po::value(&query_file), "internal")("dims", po::value(&serve_dims), "internal");
  po::variables_map vm;
  po::store(po::parse_command_line(argc, argv, desc), vm);
  po::notify(vm);
  if (!serve.empty()) return Serve(serve, query_file, serve_dims, rerank, out);
  if (vm.count("help") || map_dir.empty() || queries_arg.empty() || out.empty()) {
    std::cout << desc << "\n";
    return vm.count("help") ? 0 : 2;
  }
  sightfix::PinLibraryThreads();
  fs::create_directories(out);
  std::vector<std::string> query_dirs;
  for (std::stringstream s(queries_arg); s.good();) {
    std::string d;
    std::getline(s, d, ',');
    if (!d.empty()) query_dirs.push_back(d);
  }
  auto catalog = sightfix::ReadCatalog(map_dir + "/catalog.sqlite");
  if (!catalog.ok()) return std::fprintf(stderr, "%s\n", catalog.status().ToString().c_str()), 1;
  auto model = sightfix::GlobalDescriptor::Deserialize(catalog->model_blob);
  if (!model.ok()) return std::fprintf(stderr, "%s\n", model.status().ToString().c_str()), 1;
  json report;
  auto t0 = Clock::now();
  const Described survey = SurveyOf(map_dir, *catalog, *model);
  const Described queries = QueriesOf(query_dirs, *model);
  const int dims = survey.vectors.cols;
  const int nq = queries.vectors.rows;
  std::printf("%d survey images, %d held-out queries from %zu drives, %d dims (%.1f s)\n",
              survey.vectors.rows, nq, query_dirs.size(), dims, Seconds(t0));
  t0 = Clock::now();
  const std::vector<float> db = Database(survey.vectors, n, seed);
  std::vector<int64_t> ids(n);
  std::iota(ids.begin(), ids.end(), 0);
  std::printf("database: %lld vectors (%d real + distractors), %.1f s\n", static_cast<long long>(n),
              survey.vectors.rows, Seconds(t0));

  // Exact search, the reference (batch: BLAS on one thread).
  faiss::IndexFlatL2 exact(dims);
  exact.add(n, db.data());
  std::vector<float> dist(nq);
  std::vector<faiss::Index::idx_t> exact_top1(nq);
  t0 = Clock::now();
  exact.search(nq, queries.vectors.ptr<float>(), 1, dist.data(), exact_top1.data());
  const double exact_ms = 1000 * Seconds(t0) / nq;
  const double exact_recall = RecallAt1(exact_top1, survey, queries);
  std::vector<float> dist10(nq * 10);
  std::vector<faiss::Index::idx_t> exact_top10(nq * 10);
  exact.search(nq, queries.vectors.ptr<float>(), 10, dist10.data(), exact_top10.data());
  const double exact_recall10 = RecallAtK(exact_top10, 10, survey, queries);
  double alone = 0;
  {
    faiss::IndexFlatL2 town(dims);  // the survey alone: no distractors
    town.add(survey.vectors.rows, survey.vectors.ptr<float>());
    std::vector<faiss::Index::idx_t> top1(nq);
    town.search(nq, queries.vectors.ptr<float>(), 1, dist.data(), top1.data());
    alone = RecallAt1(top1, survey, queries);
  }
  std::printf(
      "exact (IndexFlatL2, %d B/image): recall@1 %.3f, recall@10 %.3f, %.1f ms/query "
      "(batched); recall@1 over the survey alone %.3f\n",
      dims * 4, exact_recall, exact_recall10, exact_ms, alone);
  report["exact"] = {{"recall_at_1", exact_recall},
                     {"recall_at_10", exact_recall10},
                     {"recall_at_1_survey_alone", alone},
                     {"ms_per_query_batched", exact_ms},
                     {"bytes_per_image", dims * 4}};
  report["database"] = {
      {"n", n}, {"survey", survey.vectors.rows}, {"queries", nq}, {"dims", dims}, {"seed", seed}};

  // The flat PQ index the catalog holds today, at this size (exhaustive ADC).
  {
    t0 = Clock::now();
    std::unique_ptr<faiss::Index> flat_pq =
        model->MakeIndex(cv::Mat(0, model->code_bytes(), CV_8U));
    for (int64_t i = 0; i < n; i += 100000) {
      const int rows = static_cast<int>(std::min<int64_t>(100000, n - i));
      cv::Mat block(rows, dims, CV_32F, const_cast<float*>(db.data() + i * dims));
      const cv::Mat codes = model->Encode(block);
      auto* flat = dynamic_cast<faiss::IndexFlatCodes*>(flat_pq.get());
      flat->codes.insert(flat->codes.end(), codes.ptr<uint8_t>(),
                         codes.ptr<uint8_t>() + codes.total());
      flat->ntotal += rows;
    }
    const double encode_s = Seconds(t0);
    std::vector<faiss::Index::idx_t> top1(nq);
    std::vector<float> d1(nq);
    const int timed = std::min(nq, 50);
    t0 = Clock::now();
    for (int q = 0; q < timed; ++q)
      flat_pq->search(1, queries.vectors.ptr<float>(q), 1, d1.data() + q, top1.data() + q);
    const double ms = 1000 * Seconds(t0) / timed;
    flat_pq->search(nq, queries.vectors.ptr<float>(), 1, d1.data(), top1.data());
    const double recall = RecallAt1(top1, survey, queries);
    std::printf(
        "flat PQ (the catalog's index today, %s, %d B/image): recall@1 %.3f, %.1f ms/query "
        "(encoded in %.1f s)\n",
        model->codec_name().c_str(), model->code_bytes(), recall, ms, encode_s);
    report["flat_pq"] = {{"recall_at_1", recall},
                         {"ms_per_query", ms},
                         {"bytes_per_image", model->code_bytes()},
                         {"codec", model->codec_name()}};
  }

  // IVF-PQ: train (one job), region shards (independent), merge on disk (one job).
  const std::string trained = out + "/trained.index";
  t0 = Clock::now();
  omp_set_num_threads(sightfix::ThreadCount(0));  // k-means: the only work running now
  sightfix::Status st = sightfix::TrainIvf(db.data(), n, dims, ivf, trained);
  omp_set_num_threads(1);
  if (!st.ok()) return std::fprintf(stderr, "%s\n", st.ToString().c_str()), 1;
  const double train_s = Seconds(t0);
  std::vector<std::string> shard_files;
  t0 = Clock::now();
  for (int s = 0; s < shards; ++s) {
    const int64_t a = n * s / shards, b = n * (s + 1) / shards;
    shard_files.push_back(out + "/region-" + std::to_string(s + 1) + ".index");
    st = sightfix::AddIvfShard(trained, db.data() + a * dims, ids.data() + a, b - a,
                               shard_files.back());
    if (!st.ok()) return std::fprintf(stderr, "%s\n", st.ToString().c_str()), 1;
  }
  const double add_s = Seconds(t0);
  t0 = Clock::now();
  const std::string index_file = out + "/map-wide.index", lists_file = out + "/map-wide.ivfdata";
  st = sightfix::MergeIvfShards(trained, shard_files, index_file, lists_file);
  if (!st.ok()) return std::fprintf(stderr, "%s\n", st.ToString().c_str()), 1;
  const double merge_s = Seconds(t0);
  const double lists_mb = fs::file_size(lists_file) / 1e6,
               index_mb = fs::file_size(index_file) / 1e6;
  std::printf(
      "IVF%d,PQ%dx8: trained in %.1f s, %d region shards added in %.1f s, merged in %.1f s; "
      "on disk: lists %.1f MB (%.1f B/image), index %.1f MB\n",
      ivf.nlist, ivf.pq_bytes, train_s, shards, add_s, merge_s, lists_mb, lists_mb * 1e6 / n,
      index_mb);
  for (const std::string& f : shard_files)
    for (const char* ext : {"", ".vec", ".ids"}) fs::remove(f + ext);

  // A fresh process loads the index and answers every query (memory and latency of its own).
  const std::string qfile = out + "/queries.f32";
  {
    std::ofstream qout(qfile, std::ios::binary);
    qout.write(reinterpret_cast<const char*>(queries.vectors.ptr<float>()),
               static_cast<std::streamsize>(queries.vectors.total() * sizeof(float)));
  }
  std::string self = fs::read_symlink("/proc/self/exe").string();
  // Rebuilt while this ran: the kernel names the old file "... (deleted)"; the new one serves.
  const std::string deleted = " (deleted)";
  if (self.size() > deleted.size() && self.rfind(deleted) == self.size() - deleted.size())
    self.resize(self.size() - deleted.size());
  auto quoted = [](const std::string& s) {  // for /bin/sh: '...' with ' written as '\''
    std::string q = "'";
    for (char c : s) q += c == '\'' ? std::string("'\\''") : std::string(1, c);
    return q + "'";
  };
  const std::string cmd = quoted(self) + " --serve " + quoted(index_file) + " --query-file " +
                          quoted(qfile) + " --dims " + std::to_string(dims) + " --rerank " +
                          std::to_string(rerank) + " --out " + quoted(out);
  if (std::system(cmd.c_str()) != 0) return std::fprintf(stderr, "the serving process failed\n"), 1;
  std::ifstream served_in(out + "/served.json");
  const json served = json::parse(served_in);
  std::ifstream ids_in(out + "/served_ids.bin", std::ios::binary);
  report["ivf"] = {{"nlist", ivf.nlist},
                   {"pq_bytes", ivf.pq_bytes},
                   {"shards", shards},
                   {"train_s", train_s},
                   {"add_s", add_s},
                   {"merge_s", merge_s},
                   {"lists_mb", lists_mb},
                   {"index_mb", index_mb},
                   {"lists_bytes_per_image", lists_mb * 1e6 / n},
                   {"quantizer_mb", ivf.nlist * dims * 4 / 1e6},
                   {"serving_process", served}};
  json rows = json::array();
  std::printf(
      "nprobe  rerank  recall@1  of exact  agrees  recall@10  ms/query  p99 ms  codes scanned\n");
  for (const json& f : served.at("per_nprobe")) {
    const int nprobe = f.at("nprobe").get<int>(), r = f.at("rerank").get<int>();
    std::vector<faiss::Index::idx_t> top10(nq * 10), top1(nq);
    static_assert(sizeof(faiss::Index::idx_t) == sizeof(int64_t));
    ids_in.read(reinterpret_cast<char*>(top10.data()), top10.size() * sizeof(top10[0]));
    for (int q = 0; q < nq; ++q) top1[q] = top10[q * 10];
    const double recall = RecallAt1(top1, survey, queries);
    const double recall10 = RecallAtK(top10, 10, survey, queries);
    int agree = 0;
    for (int q = 0; q < nq; ++q) agree += top1[q] == exact_top1[q];
    const double mean = f.at("ms_per_query").get<double>(), p99 = f.at("p99_ms").get<double>();
    const double scanned = static_cast<double>(n) * nprobe / ivf.nlist;
    std::printf("%6d  %6d  %8.3f  %8.3f  %6.3f  %9.3f  %8.3f  %6.3f  %.0f\n", nprobe, r, recall,
                exact_recall > 0 ? recall / exact_recall : 0, double(agree) / nq, recall10, mean,
                p99, scanned);
    rows.push_back({{"nprobe", nprobe},
                    {"rerank", r},
                    {"recall_at_1", recall},
                    {"of_exact", exact_recall > 0 ? recall / exact_recall : 0},
                    {"agrees_with_exact", double(agree) / nq},
                    {"recall_at_10", recall10},
                    {"ms_per_query", mean},
                    {"p99_ms", p99},
                    {"codes_scanned", scanned}});
  }
  report["ivf"]["per_nprobe"] = rows;
  std::printf(
      "the serving process: %.1f MB private after load, %.1f MB private and %.1f MB of "
      "mapped lists resident after all queries, %.1f MB resident in all (coarse quantizer "
      "%.1f MB)\n",
      served.at("rss_anon_mb_loaded").get<double>(),
      served.at("rss_anon_mb_after_queries").get<double>(),
      served.at("rss_file_mb_after_queries").get<double>(),
      served.at("rss_total_mb_after_queries").get<double>(), ivf.nlist * dims * 4 / 1e6);
  std::ofstream(out + "/ivf_bench.json") << report.dump(2) << "\n";
  std::printf("figures: %s/ivf_bench.json\n", out.c_str());
  return 0;
}
