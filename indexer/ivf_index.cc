#include "indexer/ivf_index.h"

#include <faiss/IndexFlat.h>
#include <faiss/index_io.h>
#include <faiss/invlists/OnDiskInvertedLists.h>

#include <filesystem>

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
  Result<std::unique_ptr<faiss::IndexIVFPQ>> index = ReadIvf(trained_path, 0);
  if (!index.ok()) return index.status();
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
  return ReadIvf(index_path, 0);
}

}  // namespace sightfix
