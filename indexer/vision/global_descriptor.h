// The compact global descriptor of an image, for retrieval.
//
// VLAD (Jegou et al., CVPR 2010) over RootSIFT with a k-means vocabulary, intra-normalised per
// cluster, power-law (signed square root) and L2-normalised (Arandjelovic & Zisserman, CVPR
// 2013); then PCA-whitening (faiss::PCAMatrix, eigen_power -0.5, epsilon added to the
// eigenvalues so that few training vectors do not blow small ones up) and product
// quantization (Jegou, Douze & Schmid, TPAMI 2011).
//
// Training sizes: FAISS wants >= 39 x 2^bits points per PQ codebook (9 984 for 8 bits) and
// refuses fewer than 2^bits. The vocabulary and PCA are trained on the survey's real images; PQ
// on their whitened VLADs plus those of augmented views (CropViews: the features inside random
// crops, i.e. zoomed and shifted views, without re-extracting features). When even that gives
// fewer than `min_pq_training` vectors, the codes are FAISS's 8-bit scalar quantizer (one byte per
// whitened dimension, min/max training only) and codec_name() says "SQ8" instead of "PQ".
// Layouts: descriptors n x 128 CV_32F, row-major; VLADs 1 x (k * 128) CV_32F.
// Thread safety: not while training; const methods may be called concurrently.
#pragma once

#include <cstdint>
#include <memory>
#include <opencv2/core.hpp>
#include <string>
#include <vector>

#include "indexer/base/status.h"
#include "indexer/vision/local_features.h"

namespace faiss {
struct Index;
struct IndexFlatL2;
struct PCAMatrix;
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
  // Fewer PQ training vectors than this (39 x 256, FAISS's advice for 8-bit codebooks): the
  // codes are 8-bit scalar-quantized instead (pca_dims bytes per image).
  int min_pq_training = 9984;
  int seed = 1234;
  bool Validate(std::string* error) const;
};

class GlobalDescriptor {
 public:
  ~GlobalDescriptor();
  GlobalDescriptor(GlobalDescriptor&&) noexcept;

  // Trains the vocabulary on local descriptors (a sample of the survey's), PCA on the VLADs of
  // `training_images` (each an n_i x 128 CV_32F matrix), and the code on those plus the VLADs of
  // `augmented_views`. PCA stays on real images: an 8192 x 8192 covariance of ten thousand
  // augmented vectors would cost minutes, and measured, whitening needs real views.
  // REQUIRES: at least 16 training images.
  static Result<GlobalDescriptor> Train(const cv::Mat& vocabulary_sample,
                                        const std::vector<cv::Mat>& training_images,
                                        const std::vector<cv::Mat>& augmented_views,
                                        const GlobalDescriptorOptions& options);

  // The model as bytes (options, vocabulary, PCA, codec) and back. Deserialize fails with
  // kCorrupt on anything it did not write.
  std::vector<uint8_t> Serialize() const;
  static Result<GlobalDescriptor> Deserialize(const std::vector<uint8_t>& bytes);

  const GlobalDescriptorOptions& options() const { return options_; }
  int vlad_dims() const;
  int code_bytes() const;
  // "PQ32x8" or "SQ8": what the codes are.
  std::string codec_name() const;
  // 1 x (k * 128) CV_32F, unit L2 (all zeros for an image without descriptors).
  cv::Mat Vlad(const cv::Mat& descriptors) const;
  // n x vlad_dims() VLADs of n images, computed on all cores.
  cv::Mat VladRows(const std::vector<cv::Mat>& images) const;
  // n x pca_dims CV_32F whitened vectors of n VLAD rows.
  cv::Mat Whiten(const cv::Mat& vlads) const;
  // n x code_bytes CV_8U PQ codes of n whitened rows.
  cv::Mat Encode(const cv::Mat& whitened) const;
  // For each query row, the indices of the k nearest database codes (asymmetric distance).
  // Wraps the codes in a FAISS index on every call: for one batch of queries, as in tests and
  // benchmarks; a server keeps its tiles' indexes instead.
  std::vector<std::vector<int64_t>> SearchCodes(const cv::Mat& database_codes,
                                                const cv::Mat& queries_whitened, int k) const;
  // A FAISS index (the codec's type) holding `database_codes`, ids 0..n-1, ready to search with
  // whitened queries. Owned by the caller.
  std::unique_ptr<faiss::Index> MakeIndex(const cv::Mat& database_codes) const;

 private:
  GlobalDescriptor();
  GlobalDescriptorOptions options_;
  cv::Mat centroids_;  // k x 128
  std::unique_ptr<faiss::IndexFlatL2> assign_;
  std::unique_ptr<faiss::PCAMatrix> pca_;
  std::unique_ptr<faiss::Index> codec_;  // IndexPQ or IndexScalarQuantizer, trained, empty
};

// Descriptor subsets of `count` random crops of one image: each keeps the features inside a
// window of 50-90 % of each side at a random place (a zoomed, shifted view). Deterministic in
// `seed`. Crops with fewer than 20 features are skipped. REQUIRES: f.descriptors n x 128.
std::vector<cv::Mat> CropViews(const LocalFeatures& f, int image_width, int image_height, int count,
                               uint64_t seed);

}  // namespace sightfix
