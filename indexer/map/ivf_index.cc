#include "indexer/map/ivf_index.h"

#include <faiss/IndexFlat.h>
#include <faiss/index_io.h>
#include <faiss/invlists/OnDiskInvertedLists.h>
#include <fcntl.h>
#include <sys/mman.h>
#include <unistd.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <numeric>

#include "indexer/base/env.h"
#include "indexer/map/map_store.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

// FAISS reports errors by exception; these turn them into a Status naming the step.
template <typename Fn>
Status Guard(const std::string& what, Fn fn) {
  try {
    return fn();
  } catch (const std::exception& e) {
    return Status::IoError(what + ": " + e.what());
  }
}

Result<std::unique_ptr<faiss::IndexIVFPQ>> ReadIvf(const std::string& path, int flags) {
  if (!fs::exists(path)) return Status::NotFound("no IVF index at " + path);
  try {
    std::unique_ptr<faiss::Index> index(faiss::read_index(path.c_str(), flags));
    auto* ivf = dynamic_cast<faiss::IndexIVFPQ*>(index.get());
    if (!ivf) return Status(StatusCode::kCorrupt, path + " is not an IVF-PQ index");
    index.release();
    return std::unique_ptr<faiss::IndexIVFPQ>(ivf);
  } catch (const std::exception& e) {
    return Status(StatusCode::kCorrupt, "cannot read " + path + ": " + e.what());
  }
}

}  // namespace

bool IvfOptions::Validate(int dims, std::string* error) const {
  auto fail = [&](const std::string& m) {
    if (error) *error = m;
    return false;
  };
  if (nlist < 1) return fail("nlist must be >= 1");
  if (pq_bytes < 1 || dims % pq_bytes != 0)
    return fail("pq_bytes must divide the dimension " + std::to_string(dims));
  if (train_size < nlist) return fail("train_size must be >= nlist");
  return true;
}

Status TrainIvf(const float* x, int64_t n, int dims, const IvfOptions& o,
                const std::string& trained_path) {
  std::string error;
  if (!o.Validate(dims, &error)) return Status::InvalidArgument(error);
  if (n < o.nlist) return Status::InvalidArgument("IVF training needs at least nlist vectors");
  return Guard("IVF training", [&] {
    faiss::IndexFlatL2 coarse(dims);
    faiss::IndexIVFPQ index(&coarse, dims, o.nlist, o.pq_bytes, 8);
    index.verbose = false;
    const int64_t m = std::min<int64_t>(n, o.train_size);
    // An evenly spaced sample: deterministic, and spread over every region the rows come from.
    std::vector<float> sample(static_cast<size_t>(m) * dims);
    for (int64_t i = 0; i < m; ++i) {
      const int64_t row = i * n / m;
      std::copy(x + row * dims, x + (row + 1) * dims, sample.begin() + i * dims);
    }
    index.train(m, sample.data());
    // The written index must own its quantizer: copy it into a new one.
    index.quantizer = new faiss::IndexFlatL2(coarse);
    index.own_fields = true;
    faiss::write_index(&index, trained_path.c_str());
    return Status::Ok();
  });
}

Status AddIvfShard(const std::string& trained_path, const float* x, const int64_t* ids, int64_t n,
                   const std::string& shard_path) {
  for (int64_t i = 1; i < n; ++i)
    if (ids[i] <= ids[i - 1])
      return Status::InvalidArgument("IVF shard " + shard_path + ": ids must increase");
  Result<std::unique_ptr<faiss::IndexIVFPQ>> index = ReadIvf(trained_path, 0);
  if (!index.ok()) return index.status();
  const size_t d = (*index)->d;
  if (Status s = WriteFileAtomically(Env::Default(), shard_path + ".vec", x, n * d * sizeof(float));
      !s.ok())
    return s;
  if (Status s = WriteFileAtomically(Env::Default(), shard_path + ".ids", ids, n * sizeof(int64_t));
      !s.ok())
    return s;
  return Guard("IVF shard " + shard_path, [&] {
    (*index)->add_with_ids(n, x, ids);
    const std::string tmp = shard_path + ".tmp";
    faiss::write_index(index->get(), tmp.c_str());
    fs::rename(tmp, shard_path);
    return Status::Ok();
  });
}

Status MergeIvfShards(const std::string& trained_path, const std::vector<std::string>& shard_paths,
                      const std::string& index_path, const std::string& lists_path) {
  Result<std::unique_ptr<faiss::IndexIVFPQ>> index = ReadIvf(trained_path, 0);
  if (!index.ok()) return index.status();
  std::vector<std::unique_ptr<faiss::IndexIVFPQ>> shards;
  std::vector<const faiss::InvertedLists*> lists;
  for (const std::string& p : shard_paths) {
    Result<std::unique_ptr<faiss::IndexIVFPQ>> s = ReadIvf(p, faiss::IO_FLAG_MMAP);
    if (!s.ok()) return s.status();
    if ((*s)->nlist != (*index)->nlist || (*s)->code_size != (*index)->code_size ||
        (*s)->d != (*index)->d)
      return Status::InvalidArgument(p + " was not made from " + trained_path);
    lists.push_back((*s)->invlists);
    shards.push_back(std::move(s).value());
  }
  // Vectors and ids in id order: shards by their first id, their ranges disjoint.
  std::vector<size_t> order(shard_paths.size());
  std::vector<std::vector<int64_t>> shard_ids(shard_paths.size());
  for (size_t i = 0; i < shard_paths.size(); ++i) {
    std::ifstream in(shard_paths[i] + ".ids", std::ios::binary | std::ios::ate);
    if (!in) return Status::NotFound("no " + shard_paths[i] + ".ids");
    shard_ids[i].resize(static_cast<size_t>(in.tellg()) / sizeof(int64_t));
    in.seekg(0);
    in.read(reinterpret_cast<char*>(shard_ids[i].data()), shard_ids[i].size() * sizeof(int64_t));
  }
  std::iota(order.begin(), order.end(), 0);
  std::sort(order.begin(), order.end(), [&](size_t a, size_t b) {
    return shard_ids[a].empty() || (!shard_ids[b].empty() && shard_ids[a][0] < shard_ids[b][0]);
  });
  int64_t last = -1;
  std::string last_shard;
  {
    std::ofstream vec(index_path + ".vec.tmp", std::ios::binary),
        idf(index_path + ".ids.tmp", std::ios::binary);
    const size_t row_bytes = (*index)->d * sizeof(float);
    for (size_t i : order) {
      if (shard_ids[i].empty()) continue;
      if (shard_ids[i][0] <= last)
        return Status::InvalidArgument(shard_paths[i] + " overlaps the ids of " + last_shard);
      last = shard_ids[i].back();
      last_shard = shard_paths[i];
      std::ifstream in(shard_paths[i] + ".vec", std::ios::binary);
      std::vector<char> buf(row_bytes * shard_ids[i].size());
      in.read(buf.data(), static_cast<std::streamsize>(buf.size()));
      if (!in) return Status::IoError("cannot read " + shard_paths[i] + ".vec");
      vec.write(buf.data(), static_cast<std::streamsize>(buf.size()));
      idf.write(reinterpret_cast<const char*>(shard_ids[i].data()),
                static_cast<std::streamsize>(shard_ids[i].size() * sizeof(int64_t)));
    }
    if (!vec.flush() || !idf.flush()) return Status::IoError("cannot write " + index_path + ".vec");
  }
  std::error_code ec;
  fs::rename(index_path + ".vec.tmp", index_path + ".vec", ec);
  fs::rename(index_path + ".ids.tmp", index_path + ".ids", ec);
  if (ec) return Status::IoError("cannot rename " + index_path + ".vec");
  return Guard("IVF merge", [&] {
    fs::remove(lists_path);
    auto* on_disk =
        new faiss::OnDiskInvertedLists((*index)->nlist, (*index)->code_size, lists_path.c_str());
    const size_t total = on_disk->merge_from(lists.data(), static_cast<int>(lists.size()));
    (*index)->ntotal = static_cast<faiss::Index::idx_t>(total);
    (*index)->replace_invlists(on_disk, true);
    faiss::write_index(index->get(), index_path.c_str());
    return Status::Ok();
  });
}

Result<std::unique_ptr<faiss::IndexIVFPQ>> LoadIvf(const std::string& index_path) {
  Result<std::unique_ptr<faiss::IndexIVFPQ>> index = ReadIvf(index_path, 0);
  if (!index.ok()) return index;
  // FAISS's on-disk lists start prefetch threads (32 by default) on every search: measured,
  // that took nprobe 32 from under 1 ms to 12 ms per query at a million images. The page cache
  // serves a hot index without them.
  if (auto* on_disk = dynamic_cast<faiss::OnDiskInvertedLists*>((*index)->invlists))
    on_disk->prefetch_nthread = 0;
  return index;
}

namespace {

// Maps a whole file read-only; nullptr on failure. `advice` as madvise(2): MADV_RANDOM for the
// vectors (a query touches ~100 scattered rows: readahead would only evict), MADV_WILLNEED for
// the ids (8 bytes an image, binary-searched on every candidate).
const void* MapFile(const std::string& path, size_t* size, int advice) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return nullptr;
  *size = static_cast<size_t>(::lseek(fd, 0, SEEK_END));
  void* p = *size ? ::mmap(nullptr, *size, PROT_READ, MAP_SHARED, fd, 0) : nullptr;
  ::close(fd);
  if (p == MAP_FAILED) return nullptr;
  if (p) ::madvise(p, *size, advice);
  return p;
}

}  // namespace

Result<std::unique_ptr<IvfSearcher>> IvfSearcher::Open(const std::string& index_path) {
  Result<std::unique_ptr<faiss::IndexIVFPQ>> index = LoadIvf(index_path);
  if (!index.ok()) return index.status();
  std::unique_ptr<IvfSearcher> s(new IvfSearcher());
  s->index_ = std::move(index).value();
  s->vectors_ =
      static_cast<const float*>(MapFile(index_path + ".vec", &s->vec_bytes_, MADV_RANDOM));
  s->ids_ =
      static_cast<const int64_t*>(MapFile(index_path + ".ids", &s->ids_bytes_, MADV_WILLNEED));
  s->n_ = s->ids_bytes_ / sizeof(int64_t);
  if (!s->vectors_ || !s->ids_ || s->n_ != static_cast<size_t>(s->index_->ntotal) ||
      s->vec_bytes_ != s->n_ * s->index_->d * sizeof(float))
    return Status(StatusCode::kCorrupt, index_path +
                                            ": its .vec and .ids files are missing or do "
                                            "not match the index");
  return s;
}

IvfSearcher::~IvfSearcher() {
  if (vectors_) ::munmap(const_cast<float*>(vectors_), vec_bytes_);
  if (ids_) ::munmap(const_cast<int64_t*>(ids_), ids_bytes_);
}

void IvfSearcher::Search(const float* q, int k, int nprobe, int rerank, int64_t* ids,
                         float* distances) const {
  faiss::IVFSearchParameters params;
  params.nprobe = nprobe;
  const int r = std::max(k, rerank);
  std::vector<faiss::Index::idx_t> cand(r);
  std::vector<float> cand_d(r);
  index_->search(1, q, r, cand_d.data(), cand.data(), &params);
  if (rerank > k) {
    const size_t d = index_->d;
    for (int i = 0; i < r; ++i) {
      if (cand[i] < 0) continue;
      const int64_t* at = std::lower_bound(ids_, ids_ + n_, static_cast<int64_t>(cand[i]));
      if (at == ids_ + n_ || *at != cand[i]) continue;
      const float* v = vectors_ + static_cast<size_t>(at - ids_) * d;
      float sum = 0;
      for (size_t j = 0; j < d; ++j) sum += (q[j] - v[j]) * (q[j] - v[j]);
      cand_d[i] = sum;
    }
  }
  std::vector<int> order(r);
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](int a, int b) {
    if ((cand[a] < 0) != (cand[b] < 0)) return cand[b] < 0;
    return cand_d[a] < cand_d[b];
  });
  for (int i = 0; i < k; ++i) {
    ids[i] = i < r ? cand[order[i]] : -1;
    distances[i] = i < r ? cand_d[order[i]] : 0;
  }
}

}  // namespace sightfix
