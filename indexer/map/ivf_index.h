// A map-wide retrieval index for maps too large to search exhaustively and queries without a
// useful prior: FAISS IVF-PQ (Jégou, Douze, Schmid, "Product quantization for nearest neighbor
// search", TPAMI 2011) over the whitened global descriptors, its inverted lists in one file
// memory-mapped from disk (FAISS OnDiskInvertedLists), so a server holds only the coarse
// quantizer in memory and the operating system pages in the lists a query probes.
//
// Re-ranking (Jégou, Tavenard, Douze, Amsaleg, "Searching in one billion vectors: re-rank with
// source coding", ICASSP 2011): the PQ distances pick `rerank` candidates, their exact distances
// to the uncompressed vectors (float32, in a file memory-mapped beside the lists) pick the k
// best. The lists cost pq_bytes + 8 bytes per image, the vectors 4 x dims on disk; memory holds
// the coarse quantizer, FAISS's precomputed tables and the pages the page cache keeps.
//
// Shardable by region: Train once on a sample (one job), then AddShard per region (independent
// jobs, any order, each writes its own files), then MergeShards into the on-disk lists (one job,
// like `publish`). Ids are the caller's (e.g. GlobalImageId), increasing within a shard, shards
// covering disjoint id ranges (regions of consecutive tiles). Merging shards gives the same
// index, code for code, as adding every vector to one index.
//
// Thread safety: building is single-threaded per call; a loaded index may be searched from
// several threads (FAISS IVF search is const).
#pragma once

#include <faiss/IndexIVFPQ.h>

#include <memory>
#include <string>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix {

struct IvfOptions {
  int nlist = 4096;         // coarse cells; FAISS guideline 4..16 x sqrt(N) (common practice)
  int pq_bytes = 32;        // PQ sub-quantizers of 8 bits: bytes per vector in the lists
  int train_size = 200000;  // vectors the quantizers are trained on (>= 39 x nlist)
  bool Validate(int dims, std::string* error) const;
};

// A trained, empty IVF-PQ index for n x dims vectors x (row-major floats), written to
// trained_path. kInvalidArgument on bad options or too few vectors.
Status TrainIvf(const float* x, int64_t n, int dims, const IvfOptions& options,
                const std::string& trained_path);

// One region's vectors (n x dims, with increasing ids) added to a copy of the trained index,
// written to shard_path (its lists in that one file), the vectors and ids beside it
// (shard_path + ".vec", ".ids").
Status AddIvfShard(const std::string& trained_path, const float* x, const int64_t* ids, int64_t n,
                   const std::string& shard_path);

// Every shard's lists merged into lists_path (OnDiskInvertedLists), the index that points at it
// written to index_path, the vectors and ids in id order to index_path + ".vec" and ".ids".
// Fails naming a shard that is missing, was trained otherwise or overlaps another's ids.
Status MergeIvfShards(const std::string& trained_path, const std::vector<std::string>& shard_paths,
                      const std::string& index_path, const std::string& lists_path);

// The merged index, its lists memory-mapped (read-only), with FAISS's per-search prefetch
// threads off.
Result<std::unique_ptr<faiss::IndexIVFPQ>> LoadIvf(const std::string& index_path);

// The merged index with its vectors for re-ranking.
class IvfSearcher {
 public:
  static Result<std::unique_ptr<IvfSearcher>> Open(const std::string& index_path);
  ~IvfSearcher();
  IvfSearcher(const IvfSearcher&) = delete;
  IvfSearcher& operator=(const IvfSearcher&) = delete;
  // The k nearest (ids, squared L2) of query q: the `rerank` best by PQ distance over `nprobe`
  // lists, re-ranked exactly (rerank <= k: no re-ranking). Missing results get id -1.
  void Search(const float* q, int k, int nprobe, int rerank, int64_t* ids, float* distances) const;
  const faiss::IndexIVFPQ& index() const { return *index_; }

 private:
  IvfSearcher() = default;
  std::unique_ptr<faiss::IndexIVFPQ> index_;
  const float* vectors_ = nullptr;  // mmapped, n x d
  const int64_t* ids_ = nullptr;    // mmapped, n, increasing
  size_t n_ = 0, vec_bytes_ = 0, ids_bytes_ = 0;
};

}  // namespace sightfix
