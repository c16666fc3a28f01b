// The compact global descriptor of an image, for retrieval.
//
// VLAD (Jegou et al., CVPR 2010) over RootSIFT with a k-means vocabulary, intra-normalised per
// cluster, power-law (signed square root) and L2-normalised (Arandjelovic & Zisserman, CVPR
// 2013); then PCA-whitening (faiss::PCAMatrix, eigen_power -0.5, epsilon added to the
// eigenvalues so that few training vectors do not blow small ones up) and product
// quantization (Jegou, Douze & Schmid, TPAMI 2011). Trained on the survey's own VLADs: the
// augmented views DESIGN.md 4.3 names for small surveys are not built yet. Layouts: descriptors n x
// 128 CV_32F, row-major; VLADs 1 x (k * 128) CV_32F. Not thread-safe while training; const methods
// are.
#pragma once

#include <cstdint>
#include <memory>
#include <opencv2/core.hpp>
#include <string>
#include <vector>

#include "indexer/status.h"

namespace faiss {
struct IndexFlatL2;
struct PCAMatrix;
struct IndexPQ;
}  // namespace faiss

namespace sightfix {

struct GlobalDescriptorOptions {
  int clusters = 64;  // VLAD vocabulary size k
  int kmeans_iterations = 25;
  int pca_dims = 256;  // whitened dimension
  // Added to the eigenvalues before whitening, relative to the mean eigenvalue of the kept
  // components. Measured on a 300-image demo survey (global_descriptor_test, 220 queries,
  // recall@1 within 25 m of exact search): 0.1 -> 0.12, 1 -> 0.31, 10 -> 0.65, no whitening 0.72.
  // Whitening learned from a few hundred images of one drive over-weights that drive's quirks,
  // so the default of 100 is close to plain PCA; revisit with larger surveys.
  float pca_epsilon = 100.0f;
  int pq_subquantizers = 32;  // 32 x 8 bits = 32 bytes per image
  int pq_bits = 8;
  int seed = 1234;
  bool Validate(std::string* error) const;
};

class GlobalDescriptor {
 public:
  ~GlobalDescriptor();
  GlobalDescriptor(GlobalDescriptor&&) noexcept;

  // Trains the vocabulary on local descriptors (a sample of the survey's), then PCA and PQ on
  // the VLADs of `training_images` (each an n_i x 128 CV_32F matrix). REQUIRES: at least
  // 2^pq_bits training images (FAISS's minimum for a PQ codebook).
  static Result<GlobalDescriptor> Train(const cv::Mat& vocabulary_sample,
                                        const std::vector<cv::Mat>& training_images,
                                        const GlobalDescriptorOptions& options);

  int vlad_dims() const;
  int code_bytes() const;
  // 1 x (k * 128) CV_32F, unit L2 (all zeros for an image without descriptors).
  cv::Mat Vlad(const cv::Mat& descriptors) const;
  // n x pca_dims CV_32F whitened vectors of n VLAD rows.
  cv::Mat Whiten(const cv::Mat& vlads) const;
  // n x code_bytes CV_8U PQ codes of n whitened rows.
  cv::Mat Encode(const cv::Mat& whitened) const;
  // For each query row, the indices of the k nearest database codes (asymmetric distance).
  // Wraps the codes in a FAISS index on every call: for one batch of queries, as in tests and
  // benchmarks; a server keeps its tiles' indexes instead.
  std::vector<std::vector<int64_t>> SearchCodes(const cv::Mat& database_codes,
                                                const cv::Mat& queries_whitened, int k) const;

 private:
  GlobalDescriptor();
  GlobalDescriptorOptions options_;
  cv::Mat centroids_;  // k x 128
  std::unique_ptr<faiss::IndexFlatL2> assign_;
  std::unique_ptr<faiss::PCAMatrix> pca_;
  std::unique_ptr<faiss::IndexPQ> pq_;
};

}  // namespace sightfix
