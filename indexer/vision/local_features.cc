#include "indexer/vision/local_features.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <opencv2/features2d.hpp>
#include <opencv2/imgproc.hpp>

namespace sightfix {

void ToRootSift(cv::Mat& d) {
  for (int i = 0; i < d.rows; ++i) {
    cv::Mat row = d.row(i);
    const double l1 = cv::norm(row, cv::NORM_L1);
    if (l1 > 0) row /= l1;
    cv::sqrt(row, row);
  }
}

bool FeatureOptions::Validate(std::string* error) const {
  if (!(min_contrast_std >= 0) || !(max_gain >= 1)) {
    if (error) *error = "min_contrast_std must be >= 0 and max_gain >= 1";
    return false;
  }
  if (max_features < 8 || max_features > 100000) {
    if (error) *error = "max_features must be within [8, 100000]";
    return false;
  }
  return true;
}

Result<LocalFeatures> ExtractFeatures(const cv::Mat& image, const CameraModel* camera,
                                      const FeatureOptions& options) {
  std::string error;
  if (!options.Validate(&error)) return Status::InvalidArgument(error);
  if (image.empty()) return Status::InvalidArgument("empty image");
  if (camera && (image.cols != camera->width_px || image.rows != camera->height_px))
    return Status::InvalidArgument("image is " + std::to_string(image.cols) + "x" +
                                   std::to_string(image.rows) + " but the calibration is for " +
                                   std::to_string(camera->width_px) + "x" +
                                   std::to_string(camera->height_px));
  LocalFeatures f;
  f.type = options.type;
  try {
    cv::Mat grey;
    if (image.channels() == 1)
      grey = image;
    else
      cv::cvtColor(image, grey, cv::COLOR_BGR2GRAY);
    if (options.min_contrast_std > 0) {
      cv::Scalar mean, stddev;
      cv::meanStdDev(grey, mean, stddev);
      if (stddev[0] > 0 && stddev[0] < options.min_contrast_std) {
        const double gain = std::min(options.max_gain, options.min_contrast_std / stddev[0]);
        // Into a buffer of its own: `grey` may share the caller's image, which is const.
        cv::Mat stretched;
        grey.convertTo(stretched, CV_8U, gain, 128.0 - gain * mean[0]);  // saturates at 0, 255
        grey = stretched;
      }
    }
    if (options.type == FeatureType::kRootSift) {
      cv::SIFT::create(options.max_features)
          ->detectAndCompute(grey, cv::noArray(), f.keypoints, f.descriptors);
      ToRootSift(f.descriptors);
    } else {
      cv::ORB::create(options.max_features)
          ->detectAndCompute(grey, cv::noArray(), f.keypoints, f.descriptors);
    }
  } catch (const cv::Exception& e) {
    return Status::Internal(std::string("feature extraction failed: ") + e.what());
  }
  NormalizeKeypoints(camera, &f);
  return f;
}

void NormalizeKeypoints(const CameraModel* camera, LocalFeatures* f) {
  f->normalized.clear();
  f->normalized.reserve(f->keypoints.size());
  for (const cv::KeyPoint& k : f->keypoints)
    f->normalized.push_back(camera ? camera->PixelToNormalized(k.pt) : cv::Point2d(k.pt));
}

cv::Mat CompactDescriptors(const cv::Mat& rootsift) {
  cv::Mat bytes;
  rootsift.convertTo(bytes, CV_8U, kRootSiftByteScale);  // rounds and saturates
  return bytes;
}

cv::Mat ExpandDescriptors(const cv::Mat& bytes) {
  cv::Mat f;
  bytes.convertTo(f, CV_32F, 1.0 / kRootSiftByteScale);
  return f;
}

namespace {

// BLAS's single-precision matrix product, Fortran interface (the BLAS FAISS links: OpenBLAS on
// Debian through its alternatives). C = alpha op(A) op(B) + beta C, column-major.
extern "C" int sgemm_(const char* transa, const char* transb, const int* m, const int* n,
                      const int* k, const float* alpha, const float* a, const int* lda,
                      const float* b, const int* ldb, const float* beta, float* c, const int* ldc);

// Float descriptors matched through one distance matrix, squared distances as
// |a|^2 + |b|^2 - 2 a.b from a BLAS product, a block of a's rows at a time: the a -> b two
// nearest and the b -> a nearest from the same products, instead of two brute-force passes of
// per-pair distances (5-10x faster on 2 000 x 2 000 RootSIFT). Ties go to the lower index, as
// in cv::BFMatcher; sums in another order can move a distance by ~1e-6, so a pair within that
// of the ratio threshold may be decided the other way.
std::vector<cv::DMatch> MatchFloat(const cv::Mat& a_in, const cv::Mat& b_in,
                                   const MatchOptions& options) {
  const cv::Mat a = a_in.isContinuous() ? a_in : a_in.clone();
  const cv::Mat b = b_in.isContinuous() ? b_in : b_in.clone();
  const int na = a.rows, nb = b.rows, dim = a.cols;
  std::vector<float> a_sq(na), b_sq(nb);
  for (int i = 0; i < na; ++i) a_sq[i] = static_cast<float>(a.row(i).dot(a.row(i)));
  for (int j = 0; j < nb; ++j) b_sq[j] = static_cast<float>(b.row(j).dot(b.row(j)));
  constexpr int kBlock = 256;
  std::vector<float> dots(static_cast<size_t>(kBlock) * nb);
  std::vector<int> best1(na), best2(na);
  std::vector<float> d1(na), d2(na);
  std::vector<int> col_best(nb, -1);
  std::vector<float> col_d(nb, std::numeric_limits<float>::infinity());
  for (int i0 = 0; i0 < na; i0 += kBlock) {
    const int rows = std::min(kBlock, na - i0);
    // Row-major a-block (rows x dim) times b^T is, column-major, b (dim x nb)^T times the
    // block (dim x rows): C column-major nb x rows = row-major rows x nb.
    const float one = 1, zero = 0;
    sgemm_("T", "N", &nb, &rows, &dim, &one, b.ptr<float>(), &dim, a.ptr<float>(i0), &dim, &zero,
           dots.data(), &nb);
    for (int r = 0; r < rows; ++r) {
      const int i = i0 + r;
      const float* dot = dots.data() + static_cast<size_t>(r) * nb;
      float first = std::numeric_limits<float>::infinity(), second = first;
      int first_j = -1, second_j = -1;
      for (int j = 0; j < nb; ++j) {
        const float d = std::max(0.0f, a_sq[i] + b_sq[j] - 2 * dot[j]);
        if (d < first) {
          second = first, second_j = first_j;
          first = d, first_j = j;
        } else if (d < second) {
          second = d, second_j = j;
        }
        if (d < col_d[j]) col_d[j] = d, col_best[j] = i;
      }
      best1[i] = first_j, best2[i] = second_j, d1[i] = first, d2[i] = second;
    }
  }
  std::vector<cv::DMatch> out;
  for (int i = 0; i < na; ++i) {
    if (best2[i] < 0) continue;
    const float first = std::sqrt(d1[i]), second = std::sqrt(d2[i]);
    if (first >= options.ratio * second) continue;
    if (options.mutual && col_best[best1[i]] != i) continue;
    out.emplace_back(i, best1[i], first);
  }
  return out;
}

}  // namespace

std::vector<cv::DMatch> MatchFeatures(const LocalFeatures& a, const LocalFeatures& b,
                                      const MatchOptions& options) {
  std::vector<cv::DMatch> out;
  if (a.descriptors.rows < 2 || b.descriptors.rows < 2 || a.type != b.type) return out;
  if (a.descriptors.type() == CV_32F && b.descriptors.type() == CV_32F &&
      a.descriptors.cols == b.descriptors.cols)
    return MatchFloat(a.descriptors, b.descriptors, options);
  cv::BFMatcher matcher(a.type == FeatureType::kOrb ? cv::NORM_HAMMING : cv::NORM_L2);
  std::vector<std::vector<cv::DMatch>> ab;
  matcher.knnMatch(a.descriptors, b.descriptors, ab, 2);
  std::vector<int> best_ba;
  if (options.mutual) {
    std::vector<cv::DMatch> ba;
    matcher.match(b.descriptors, a.descriptors, ba);
    best_ba.assign(b.descriptors.rows, -1);
    for (const cv::DMatch& m : ba) best_ba[m.queryIdx] = m.trainIdx;
  }
  for (const auto& m : ab) {
    if (m.size() < 2 || m[0].distance >= options.ratio * m[1].distance) continue;
    if (options.mutual && best_ba[m[0].trainIdx] != m[0].queryIdx) continue;
    out.push_back(m[0]);
  }
  return out;
}

}  // namespace sightfix
