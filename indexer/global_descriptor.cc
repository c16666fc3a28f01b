#include "indexer/global_descriptor.h"

#include <faiss/Clustering.h>
#include <faiss/IndexFlat.h>
#include <faiss/IndexPQ.h>
#include <faiss/VectorTransform.h>
#include <faiss/impl/FaissException.h>
#include <omp.h>

#include <cmath>

namespace sightfix {

bool GlobalDescriptorOptions::Validate(std::string* error) const {
  auto fail = [&](const char* m) {
    if (error) *error = m;
    return false;
  };
  if (clusters < 2 || clusters > 1024) return fail("clusters must be within [2, 1024]");
  if (pca_dims < 8 || pca_dims > clusters * 128)
    return fail("pca_dims must be within [8, clusters * 128]");
  if (pq_subquantizers < 1 || pca_dims % pq_subquantizers != 0)
    return fail("pq_subquantizers must divide pca_dims");
  if (pq_bits < 1 || pq_bits > 12) return fail("pq_bits must be within [1, 12]");
  if (!(pca_epsilon >= 0)) return fail("pca_epsilon must be >= 0");
  return true;
}

GlobalDescriptor::GlobalDescriptor() = default;
GlobalDescriptor::~GlobalDescriptor() = default;
GlobalDescriptor::GlobalDescriptor(GlobalDescriptor&&) noexcept = default;

int GlobalDescriptor::vlad_dims() const { return options_.clusters * 128; }
int GlobalDescriptor::code_bytes() const { return static_cast<int>(pq_->code_size); }

Result<GlobalDescriptor> GlobalDescriptor::Train(const cv::Mat& sample,
                                                 const std::vector<cv::Mat>& images,
                                                 const GlobalDescriptorOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  if (sample.type() != CV_32F || sample.cols != 128 || sample.rows < o.clusters * 4)
    return Status::InvalidArgument(
        "vocabulary sample must be n x 128 CV_32F with n >= 4 * clusters");
  if (static_cast<int>(images.size()) < (1 << o.pq_bits))
    return Status::InvalidArgument("PQ training needs at least " + std::to_string(1 << o.pq_bits) +
                                   " images, got " + std::to_string(images.size()));
  omp_set_num_threads(1);  // we parallelise across images ourselves (DEVELOPERS.md, Threads)
  GlobalDescriptor g;
  g.options_ = o;
  try {
    faiss::ClusteringParameters cp;
    cp.niter = o.kmeans_iterations;
    cp.seed = o.seed;
    cp.max_points_per_centroid = 1 << 20;
    faiss::Clustering km(128, o.clusters, cp);
    faiss::IndexFlatL2 km_index(128);
    const cv::Mat s = sample.isContinuous() ? sample : sample.clone();
    km.train(s.rows, s.ptr<float>(), km_index);
    g.centroids_ = cv::Mat(o.clusters, 128, CV_32F, km.centroids.data()).clone();
    g.assign_ = std::make_unique<faiss::IndexFlatL2>(128);
    g.assign_->add(o.clusters, g.centroids_.ptr<float>());

    cv::Mat vlads(static_cast<int>(images.size()), g.vlad_dims(), CV_32F);
    for (size_t i = 0; i < images.size(); ++i)
      g.Vlad(images[i]).copyTo(vlads.row(static_cast<int>(i)));
    g.pca_ = std::make_unique<faiss::PCAMatrix>(g.vlad_dims(), o.pca_dims, -0.5f, false);
    // Directions the few training images barely span have eigenvalues near 0: whitening would
    // scale them, and the queries' own noise in them, by 1/sqrt(eigenvalue). So epsilon is
    // relative to the mean eigenvalue of the kept components (FAISS's eigenvalues are not
    // divided by the number of vectors, hence set after training, then the matrix re-made).
    g.pca_->train(vlads.rows, vlads.ptr<float>());
    double mean_eig = 0;
    for (int i = 0; i < o.pca_dims; ++i) mean_eig += g.pca_->eigenvalues[i] / o.pca_dims;
    g.pca_->epsilon = static_cast<float>(o.pca_epsilon * mean_eig);
    g.pca_->prepare_Ab();
    const cv::Mat white = g.Whiten(vlads);
    g.pq_ = std::make_unique<faiss::IndexPQ>(o.pca_dims, o.pq_subquantizers, o.pq_bits);
    g.pq_->train(white.rows, white.ptr<float>());
  } catch (const faiss::FaissException& e) {
    return Status::Internal(std::string("FAISS training failed: ") + e.what());
  }
  return g;
}

cv::Mat GlobalDescriptor::Vlad(const cv::Mat& d) const {
  const int k = options_.clusters;
  cv::Mat v = cv::Mat::zeros(k, 128, CV_32F);
  if (d.rows > 0) {
    const cv::Mat dc = d.isContinuous() ? d : d.clone();
    std::vector<float> dist(dc.rows);
    std::vector<faiss::Index::idx_t> label(dc.rows);
    assign_->search(dc.rows, dc.ptr<float>(), 1, dist.data(), label.data());
    for (int i = 0; i < dc.rows; ++i)
      v.row(static_cast<int>(label[i])) += dc.row(i) - centroids_.row(static_cast<int>(label[i]));
    for (int c = 0; c < k; ++c) {  // intra-normalisation
      const double n = cv::norm(v.row(c));
      if (n > 0) v.row(c) /= n;
    }
    for (float *p = v.ptr<float>(), *e = p + v.total(); p < e; ++p)  // power-law, alpha 0.5
      *p = std::copysign(std::sqrt(std::abs(*p)), *p);
    const double n = cv::norm(v);
    if (n > 0) v /= n;
  }
  return v.reshape(1, 1);
}

cv::Mat GlobalDescriptor::Whiten(const cv::Mat& vlads) const {
  cv::Mat out(vlads.rows, options_.pca_dims, CV_32F);
  const cv::Mat in = vlads.isContinuous() ? vlads : vlads.clone();
  pca_->apply_noalloc(in.rows, in.ptr<float>(), out.ptr<float>());
  return out;
}

cv::Mat GlobalDescriptor::Encode(const cv::Mat& whitened) const {
  cv::Mat codes(whitened.rows, code_bytes(), CV_8U);
  const cv::Mat in = whitened.isContinuous() ? whitened : whitened.clone();
  pq_->pq.compute_codes(in.ptr<float>(), codes.ptr<uint8_t>(), in.rows);
  return codes;
}

std::vector<std::vector<int64_t>> GlobalDescriptor::SearchCodes(const cv::Mat& codes,
                                                                const cv::Mat& queries,
                                                                int k) const {
  faiss::IndexPQ index(options_.pca_dims, options_.pq_subquantizers, options_.pq_bits);
  index.pq = pq_->pq;
  index.is_trained = true;
  index.codes.assign(codes.ptr<uint8_t>(), codes.ptr<uint8_t>() + codes.total());
  index.ntotal = codes.rows;
  std::vector<float> dist(static_cast<size_t>(queries.rows) * k);
  std::vector<faiss::Index::idx_t> labels(dist.size());
  const cv::Mat q = queries.isContinuous() ? queries : queries.clone();
  index.search(q.rows, q.ptr<float>(), k, dist.data(), labels.data());
  std::vector<std::vector<int64_t>> out(q.rows);
  for (int i = 0; i < q.rows; ++i)
    out[i].assign(labels.begin() + i * k, labels.begin() + (i + 1) * k);
  return out;
}

}  // namespace sightfix
