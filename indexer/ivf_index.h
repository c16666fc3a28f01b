// A map-wide retrieval index for maps too large to search exhaustively and queries without a
// useful prior: FAISS IVF-PQ (Jégou, Douze, Schmid, "Product quantization for nearest neighbor
// search", TPAMI 2011) over the whitened global descriptors, its inverted lists in one file
// memory-mapped from disk (FAISS OnDiskInvertedLists), so a server holds only the coarse
// quantizer in memory and the operating system pages in the lists a query probes.
//
// Shardable by region: Train once on a sample (one job), then AddShard per region (independent
// jobs, any order, each writes its own file), then MergeShards into the on-disk lists (one job,
// like `publish`). Ids are the caller's (e.g. GlobalImageId). Merging shards gives the same
// index, code for code, as adding every vector to one index.
//
// Thread safety: building is single-threaded per call; a loaded index may be searched from
// several threads (FAISS IVF search is const).
#pragma once

#include <faiss/IndexIVFPQ.h>

#include <memory>
#include <string>
#include <vector>

#include "indexer/status.h"

namespace sightfix {

struct IvfOptions {
  int nlist = 4096;       // coarse cells; FAISS guideline 4..16 x sqrt(N) (common practice)
  int pq_bytes = 32;      // PQ sub-quantizers of 8 bits: bytes per vector in the lists
  int train_size = 200000;  // vectors the quantizers are trained on (>= 39 x nlist)
  bool Validate(int dims, std::string* error) const;
};

// A trained, empty IVF-PQ index for n x dims vectors x (row-major floats), written to
// trained_path. kInvalidArgument on bad options or too few vectors.
Status TrainIvf(const float* x, int64_t n, int dims, const IvfOptions& options,
                const std::string& trained_path);

// One region's vectors (n x dims, with ids) added to a copy of the trained index, written to
// shard_path (its lists in memory, in that one file).
Status AddIvfShard(const std::string& trained_path, const float* x, const int64_t* ids, int64_t n,
                   const std::string& shard_path);

// Every shard's lists merged into lists_path (OnDiskInvertedLists), the index that points at it
// written to index_path. Fails naming a shard that is missing or was trained otherwise.
Status MergeIvfShards(const std::string& trained_path, const std::vector<std::string>& shard_paths,
                      const std::string& index_path, const std::string& lists_path);

// The merged index, its lists memory-mapped (read-only).
Result<std::unique_ptr<faiss::IndexIVFPQ>> LoadIvf(const std::string& index_path);

}  // namespace sightfix
