#include "indexer/vision/global_descriptor.h"

#include <faiss/Clustering.h>
#include <faiss/IndexFlat.h>
#include <faiss/IndexPQ.h>
#include <faiss/IndexScalarQuantizer.h>
#include <faiss/VectorTransform.h>
#include <faiss/clone_index.h>
#include <faiss/impl/FaissException.h>
#include <faiss/impl/io.h>
#include <faiss/index_io.h>
#include <omp.h>

#include <cmath>
#include <cstring>
#include <random>

#include "indexer/base/parallel.h"

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
  if (min_pq_training < (1 << pq_bits)) return fail("min_pq_training must be >= 2^pq_bits");
  return true;
}

GlobalDescriptor::GlobalDescriptor() = default;
GlobalDescriptor::~GlobalDescriptor() = default;
GlobalDescriptor::GlobalDescriptor(GlobalDescriptor&&) noexcept = default;

int GlobalDescriptor::vlad_dims() const { return options_.clusters * 128; }
int GlobalDescriptor::code_bytes() const { return static_cast<int>(codec_->sa_code_size()); }

std::string GlobalDescriptor::codec_name() const {
  if (dynamic_cast<const faiss::IndexPQ*>(codec_.get()))
    return "PQ" + std::to_string(options_.pq_subquantizers) + "x" +
           std::to_string(options_.pq_bits);
  return "SQ8";
}

Result<GlobalDescriptor> GlobalDescriptor::Train(const cv::Mat& sample,
                                                 const std::vector<cv::Mat>& images,
                                                 const std::vector<cv::Mat>& augmented,
                                                 const GlobalDescriptorOptions& requested) {
  // n training images span at most n - 1 PCA directions: a small survey keeps fewer dimensions
  // (a multiple of pq_subquantizers), and options() reports what was used.
  GlobalDescriptorOptions o = requested;
  const int rank = static_cast<int>(images.size()) - 1;
  if (o.pca_dims > rank && rank >= o.pq_subquantizers)
    o.pca_dims = rank / o.pq_subquantizers * o.pq_subquantizers;
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  if (sample.type() != CV_32F || sample.cols != 128 || sample.rows < o.clusters * 4)
    return Status::InvalidArgument(
        "vocabulary sample must be n x 128 CV_32F with n >= 4 * clusters");
  if (static_cast<int>(images.size()) <= o.pq_subquantizers)
    return Status::InvalidArgument("training needs more than " +
                                   std::to_string(o.pq_subquantizers) + " images, got " +
                                   std::to_string(images.size()));
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

    const cv::Mat vlads = g.VladRows(images);
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
    cv::Mat white = g.Whiten(vlads);
    if (!augmented.empty()) white.push_back(g.Whiten(g.VladRows(augmented)));
    if (white.rows >= o.min_pq_training)
      g.codec_ = std::make_unique<faiss::IndexPQ>(o.pca_dims, o.pq_subquantizers, o.pq_bits);
    else
      g.codec_ = std::make_unique<faiss::IndexScalarQuantizer>(o.pca_dims,
                                                               faiss::ScalarQuantizer::QT_8bit);
    g.codec_->train(white.rows, white.ptr<float>());
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

cv::Mat GlobalDescriptor::VladRows(const std::vector<cv::Mat>& images) const {
  cv::Mat vlads(static_cast<int>(images.size()), vlad_dims(), CV_32F);
  ParallelFor(vlads.rows, ThreadCount(0), [&](int i) { Vlad(images[i]).copyTo(vlads.row(i)); });
  return vlads;
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
  codec_->sa_encode(in.rows, in.ptr<float>(), codes.ptr<uint8_t>());
  return codes;
}

std::unique_ptr<faiss::Index> GlobalDescriptor::MakeIndex(const cv::Mat& codes) const {
  std::unique_ptr<faiss::Index> index(faiss::clone_index(codec_.get()));
  auto* flat = dynamic_cast<faiss::IndexFlatCodes*>(index.get());
  flat->codes.assign(codes.ptr<uint8_t>(), codes.ptr<uint8_t>() + codes.total());
  flat->ntotal = codes.rows;
  return index;
}

std::vector<std::vector<int64_t>> GlobalDescriptor::SearchCodes(const cv::Mat& codes,
                                                                const cv::Mat& queries,
                                                                int k) const {
  const std::unique_ptr<faiss::Index> index = MakeIndex(codes);
  std::vector<float> dist(static_cast<size_t>(queries.rows) * k);
  std::vector<faiss::Index::idx_t> labels(dist.size());
  const cv::Mat q = queries.isContinuous() ? queries : queries.clone();
  index->search(q.rows, q.ptr<float>(), k, dist.data(), labels.data());
  std::vector<std::vector<int64_t>> out(q.rows);
  for (int i = 0; i < q.rows; ++i)
    out[i].assign(labels.begin() + i * k, labels.begin() + (i + 1) * k);
  return out;
}

namespace {

constexpr char kModelMagic[8] = {'S', 'F', 'G', 'D', 'v', '1', 0, 0};

template <typename T>
void Put(faiss::VectorIOWriter& w, const T& v) {
  w(&v, sizeof(T), 1);
}

template <typename T>
void Get(faiss::VectorIOReader& r, T* v) {
  if (r(v, sizeof(T), 1) != 1) throw faiss::FaissException("model bytes truncated");
}

}  // namespace

std::vector<uint8_t> GlobalDescriptor::Serialize() const {
  faiss::VectorIOWriter w;
  w(kModelMagic, 1, sizeof(kModelMagic));
  const GlobalDescriptorOptions& o = options_;
  for (int v : {o.clusters, o.kmeans_iterations, o.pca_dims, o.pq_subquantizers, o.pq_bits,
                o.min_pq_training, o.seed})
    Put(w, v);
  Put(w, o.pca_epsilon);
  w(centroids_.ptr<float>(), sizeof(float), centroids_.total());
  faiss::write_VectorTransform(pca_.get(), &w);
  faiss::write_index(codec_.get(), &w);
  return std::move(w.data);
}

Result<GlobalDescriptor> GlobalDescriptor::Deserialize(const std::vector<uint8_t>& bytes) {
  GlobalDescriptor g;
  try {
    faiss::VectorIOReader r;
    r.data = bytes;
    char magic[sizeof(kModelMagic)];
    if (r(magic, 1, sizeof(magic)) != sizeof(magic) ||
        std::memcmp(magic, kModelMagic, sizeof(magic)) != 0)
      return Status::Corrupt("not a sightfix global-descriptor model");
    GlobalDescriptorOptions& o = g.options_;
    for (int* v : {&o.clusters, &o.kmeans_iterations, &o.pca_dims, &o.pq_subquantizers, &o.pq_bits,
                   &o.min_pq_training, &o.seed})
      Get(r, v);
    Get(r, &o.pca_epsilon);
    std::string error;
    if (!o.Validate(&error)) return Status::Corrupt("model options: " + error);
    g.centroids_ = cv::Mat(o.clusters, 128, CV_32F);
    if (r(g.centroids_.ptr<float>(), sizeof(float), g.centroids_.total()) != g.centroids_.total())
      return Status::Corrupt("model bytes truncated in the vocabulary");
    g.assign_ = std::make_unique<faiss::IndexFlatL2>(128);
    g.assign_->add(o.clusters, g.centroids_.ptr<float>());
    g.pca_.reset(dynamic_cast<faiss::PCAMatrix*>(faiss::read_VectorTransform(&r)));
    g.codec_.reset(faiss::read_index(&r));
    if (!g.pca_ || !g.codec_ || !dynamic_cast<faiss::IndexFlatCodes*>(g.codec_.get()) ||
        g.pca_->d_in != g.vlad_dims() || g.pca_->d_out != o.pca_dims || g.codec_->d != o.pca_dims)
      return Status::Corrupt("model PCA or codec does not fit its options");
  } catch (const faiss::FaissException& e) {
    return Status::Corrupt(std::string("model bytes unreadable: ") + e.what());
  }
  return g;
}

std::vector<cv::Mat> CropViews(const LocalFeatures& f, int width, int height, int count,
                               uint64_t seed) {
  std::mt19937_64 rng(seed);  // raw engine output is specified by the standard; portable
  auto uniform = [&](double lo, double hi) {
    return lo + (hi - lo) * static_cast<double>(rng() >> 11) * 0x1.0p-53;
  };
  std::vector<cv::Mat> views;
  for (int c = 0; c < count; ++c) {
    const double w = uniform(0.5, 0.9) * width, h = uniform(0.5, 0.9) * height;
    const double x0 = uniform(0, width - w), y0 = uniform(0, height - h);
    cv::Mat view;
    for (size_t i = 0; i < f.keypoints.size(); ++i) {
      const cv::Point2f& p = f.keypoints[i].pt;
      if (p.x >= x0 && p.x < x0 + w && p.y >= y0 && p.y < y0 + h)
        view.push_back(f.descriptors.row(static_cast<int>(i)));
    }
    if (view.rows >= 20) views.push_back(view);
  }
  return views;
}

}  // namespace sightfix
