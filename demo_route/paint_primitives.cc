#include "demo_route/paint_primitives.h"

#include <algorithm>
#include <cmath>
#include <opencv2/imgproc.hpp>
#include <vector>

namespace sightfix::demo {

cv::Scalar Hsv(double h, double s, double v) {
  cv::Mat3b px(1, 1,
               cv::Vec3b(static_cast<uchar>(std::fmod(h, 180.0)), static_cast<uchar>(s * 255),
                         static_cast<uchar>(v * 255)));
  cv::cvtColor(px, px, cv::COLOR_HSV2BGR);
  return cv::Scalar(px(0, 0)[0], px(0, 0)[1], px(0, 0)[2]);
}

cv::Scalar RandomColour(Rng& r, double smin, double smax, double vmin, double vmax) {
  const double v = r.Uniform(vmin, vmax), s = r.Uniform(smin, smax), h = r.Uniform(0, 180);
  return Hsv(h, s, v);
}

void AddNoise(cv::Mat& img, Rng& r, double feature_px, double amplitude) {
  const int w = std::max(2, static_cast<int>(img.cols / feature_px) + 2);
  const int h = std::max(2, static_cast<int>(img.rows / feature_px) + 2);
  cv::Mat small(h, w, CV_32F);
  for (int y = 0; y < h; ++y)
    for (int x = 0; x < w; ++x) small.at<float>(y, x) = static_cast<float>(r.Normal() * amplitude);
  cv::Mat big;
  cv::resize(small, big, img.size(), 0, 0, cv::INTER_CUBIC);
  cv::Mat f;
  img.convertTo(f, CV_32FC3);
  std::vector<cv::Mat> ch;
  cv::split(f, ch);
  for (cv::Mat& c : ch) c += big;
  cv::merge(ch, f);
  f.convertTo(img, CV_8UC3);
}

void Speckle(cv::Mat& img, Rng& r, int count, double max_r, double strength) {
  for (int i = 0; i < count; ++i) {
    const int y = r.Int(0, img.rows - 1), x = r.Int(0, img.cols - 1);
    const cv::Point p(x, y);
    const double f = 1.0 + r.Uniform(-strength, strength);
    const cv::Vec3b c = img.at<cv::Vec3b>(p);
    cv::circle(img, p, std::max(1, static_cast<int>(r.Uniform(0.5, max_r))),
               cv::Scalar(c[0] * f, c[1] * f, c[2] * f), -1, cv::LINE_AA);
  }
}

}  // namespace sightfix::demo
