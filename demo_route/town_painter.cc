#include "demo_route/town_painter.h"

#include <algorithm>
#include <cmath>
#include <opencv2/imgproc.hpp>

#include "demo_route/paint_primitives.h"
#include "demo_route/random.h"

namespace sightfix::demo {

GlyphSet::GlyphSet(uint64_t seed, int count) {
  Rng r(HashSeed(seed, 0x676c79));
  for (int g = 0; g < count; ++g) {
    std::vector<std::vector<cv::Point2d>> strokes;
    for (int s = 0, n = r.Int(2, 4); s < n; ++s) {
      std::vector<cv::Point2d> pts;
      for (int k = 0, m = r.Int(2, 3); k < m; ++k) {
        const double py = r.Int(0, 3) / 3.0, px = r.Int(0, 2) / 2.0;
        pts.emplace_back(px, py);
      }
      strokes.push_back(pts);
    }
    glyphs_.push_back(strokes);
  }
}

void GlyphSet::DrawText(cv::Mat& img, cv::Point2d at, double h, int n, uint64_t seed,
                        const cv::Scalar& colour, int thickness) const {
  Rng r(seed);
  const double w = h * 0.6, gap = h * 0.3;
  for (int i = 0; i < n; ++i) {
    const auto& glyph = glyphs_[r.Int(0, count() - 1)];
    const cv::Point2d o(at.x + i * (w + gap), at.y);
    for (const auto& stroke : glyph) {
      std::vector<cv::Point> pts;
      for (const cv::Point2d& p : stroke)
        pts.emplace_back(cv::Point(int(o.x + p.x * w), int(o.y + p.y * h)));
      cv::polylines(img, pts, false, colour, thickness, cv::LINE_AA);
    }
  }
}

int TextureBank::Add(Painter painter, double texels_per_m) {
  auto slot = std::make_unique<Slot>();
  slot->painter = std::move(painter);
  slot->texels_per_m = texels_per_m;
  slots_.push_back(std::move(slot));
  return static_cast<int>(slots_.size()) - 1;
}

const Texture& TextureBank::Get(int id) const {
  const Slot& slot = *slots_[id];
  std::call_once(slot.once, [&slot] {
    cv::Mat base = slot.painter();
    slot.texture.has_alpha = base.channels() == 4;
    slot.texture.texels_per_m = slot.texels_per_m;
    slot.texture.levels.push_back(base);
    while (slot.texture.levels.back().cols > 2 && slot.texture.levels.back().rows > 2) {
      cv::Mat next;
      cv::pyrDown(slot.texture.levels.back(), next);
      slot.texture.levels.push_back(next);
    }
  });
  return slot.texture;
}

cv::Mat PaintPlainWall(double width_m, double height_m, uint64_t seed) {
  Rng r(seed);
  cv::Mat img(std::max(4, int(height_m * kPlainTexelsPerM)),
              std::max(4, int(width_m * kPlainTexelsPerM)), CV_8UC3);
  const double v = r.Uniform(0.45, 0.75), s = r.Uniform(0.05, 0.3), h = r.Uniform(0, 180);
  img.setTo(Hsv(h, s, v));
  AddNoise(img, r, 0.7 * kPlainTexelsPerM, 9);
  Speckle(img, r, img.total() / 80, 1.5, 0.15);
  return img;
}

namespace {

// A long side of a vehicle: windows with a pillar, wheels, and by chance a livery stripe with
// invented lettering.
void PaintVehicleSide(cv::Mat& img, Rng& rf, const cv::Scalar& body, double glass_top,
                      double glass_bottom, const GlyphSet& glyphs) {
  const double ppm = kObjectTexelsPerM;
  cv::rectangle(img,
                cv::Rect2d(0.12 * img.cols, glass_top, 0.76 * img.cols, glass_bottom - glass_top),
                Hsv(105, 0.25, 0.18), -1);
  cv::line(img, cv::Point2d(0.5 * img.cols, glass_top),
           cv::Point2d(0.5 * img.cols, img.rows * 0.85), Shade(body, 0.5), 2);
  for (double wx : {0.2, 0.8}) {  // wheels: tyre and hub
    const cv::Point2d hub(wx * img.cols, img.rows - 0.3 * ppm);
    cv::circle(img, hub, int(0.32 * ppm), cv::Scalar(25, 25, 25), -1, cv::LINE_AA);
    cv::circle(img, hub, int(0.16 * ppm), cv::Scalar(150, 150, 150), -1, cv::LINE_AA);
  }
  if (!rf.Chance(0.45)) return;
  const cv::Scalar c = RandomColour(rf, 0.6, 1.0, 0.3, 1.0);
  cv::rectangle(img, cv::Rect2d(0.1 * img.cols, 0.55 * img.rows, 0.8 * img.cols, 0.12 * img.rows),
                c, -1);
  const uint64_t text_seed = rf.Next();
  const int letters = rf.Int(3, 6);
  glyphs.DrawText(img, {0.25 * img.cols, 0.7 * img.rows}, 0.14 * img.rows, letters, text_seed,
                  Shade(c, 0.4), 2);
}

// The front (face 2: white lights) or back (face 3: red lights) of a vehicle: window, lights
// and a lettered plate.
void PaintVehicleEnd(cv::Mat& img, Rng& rf, int face, double glass_top, double glass_bottom,
                     const GlyphSet& glyphs) {
  cv::rectangle(img,
                cv::Rect2d(0.1 * img.cols, glass_top, 0.8 * img.cols, glass_bottom - glass_top),
                Hsv(105, 0.25, 0.18), -1);
  const cv::Scalar light = face == 2 ? cv::Scalar(220, 235, 240) : cv::Scalar(40, 40, 200);
  for (double lx : {0.08, 0.78})
    cv::rectangle(img, cv::Rect2d(lx * img.cols, 0.55 * img.rows, 0.14 * img.cols, 0.1 * img.rows),
                  light, -1);
  const cv::Rect2d plate(0.35 * img.cols, 0.7 * img.rows, 0.3 * img.cols, 0.1 * img.rows);
  cv::rectangle(img, plate, cv::Scalar(235, 235, 235), -1);
  glyphs.DrawText(img, {plate.x + 3, plate.y + 2}, plate.height - 4, 5, rf.Next(),
                  cv::Scalar(20, 20, 20), 1);
}

}  // namespace

cv::Mat PaintVehicle(double length_m, double height_m, uint64_t seed, int face,
                     const GlyphSet& glyphs) {
  Rng r(seed);  // same seed for every face: one body colour per vehicle
  const cv::Scalar body = RandomColour(r, 0.0, 0.9, 0.2, 0.95);
  const double ppm = kObjectTexelsPerM;
  Rng rf(HashSeed(seed, face));
  cv::Mat img(std::max(4, int(height_m * ppm)), std::max(4, int(length_m * ppm)), CV_8UC3, body);
  AddNoise(img, rf, 0.5 * ppm, 4);
  const double glass_top = 0.08 * img.rows, glass_bottom = 0.45 * img.rows;
  if (face == 4) return img;  // roof
  if (face == 0 || face == 1)
    PaintVehicleSide(img, rf, body, glass_top, glass_bottom, glyphs);
  else
    PaintVehicleEnd(img, rf, face, glass_top, glass_bottom, glyphs);
  return img;
}

cv::Mat PaintMetal(uint64_t seed) {
  Rng r(seed);
  const double v = r.Uniform(0.2, 0.45), s = r.Uniform(0.0, 0.3), h = r.Uniform(0, 180);
  cv::Mat img(64, 8, CV_8UC3, Hsv(h, s, v));
  AddNoise(img, r, 6, 10);
  return img;
}

cv::Mat PaintSign(uint64_t seed, const GlyphSet& glyphs) {
  Rng r(seed);
  const int n = int(0.7 * kObjectTexelsPerM);
  cv::Mat img(n, n, CV_8UC4, cv::Scalar(0, 0, 0, 0));
  const cv::Scalar rim = RandomColour(r, 0.7, 1.0, 0.5, 0.9),
                   fill = RandomColour(r, 0.0, 0.4, 0.7, 1.0);
  const cv::Scalar rim4(rim[0], rim[1], rim[2], 255), fill4(fill[0], fill[1], fill[2], 255);
  if (r.Chance(0.5)) {
    cv::circle(img, {n / 2, n / 2}, n / 2 - 1, rim4, -1, cv::LINE_8);
    cv::circle(img, {n / 2, n / 2}, n / 2 - 5, fill4, -1, cv::LINE_8);
  } else {
    cv::rectangle(img, cv::Rect(1, 1, n - 2, n - 2), rim4, -1);
    cv::rectangle(img, cv::Rect(5, 5, n - 10, n - 10), fill4, -1);
  }
  glyphs.DrawText(img, {n * 0.28, n * 0.3}, n * 0.4, 1, r.Next(), cv::Scalar(20, 20, 20, 255), 3);
  return img;
}

cv::Mat PaintCanopy(uint64_t seed) {
  Rng r(seed);
  const int n = 128;
  cv::Mat img(n, n, CV_8UC4, cv::Scalar(0, 0, 0, 0));
  const double hue = r.Uniform(30, 70);
  for (int i = 0; i < 900; ++i) {
    const double a = r.Uniform(0, 2 * M_PI), d = std::sqrt(r.Unit()) * n * 0.46;
    const cv::Point2d p(n / 2 + d * std::cos(a), n / 2 + d * std::sin(a) * 0.9);
    const double cv_ = r.Uniform(0.15, 0.6), cs = r.Uniform(0.5, 0.9), ch = hue + r.Uniform(-8, 8);
    const cv::Scalar c = Hsv(ch, cs, cv_);
    const double angle = r.Uniform(0, 180), h = r.Uniform(1, 2.5), w = r.Uniform(1.5, 4);
    cv::ellipse(img, p, cv::Size2d(w, h), angle, 0, 360, cv::Scalar(c[0], c[1], c[2], 255), -1,
                cv::LINE_8);
  }
  return img;
}

cv::Mat PaintBark(uint64_t seed) {
  Rng r(seed);
  const double v = r.Uniform(0.2, 0.35), h = r.Uniform(5, 20);
  cv::Mat img(96, 16, CV_8UC3, Hsv(h, 0.5, v));
  AddNoise(img, r, 3, 14);
  return img;
}

}  // namespace sightfix::demo
