#include "demo_route/town_painter.h"

#include <algorithm>
#include <cmath>
#include <opencv2/imgproc.hpp>

#include "demo_route/random.h"

namespace sightfix::demo {
namespace {

cv::Scalar Hsv(double h, double s, double v) {
  cv::Mat3b px(1, 1,
               cv::Vec3b(static_cast<uchar>(std::fmod(h, 180.0)), static_cast<uchar>(s * 255),
                         static_cast<uchar>(v * 255)));
  cv::cvtColor(px, px, cv::COLOR_HSV2BGR);
  return cv::Scalar(px(0, 0)[0], px(0, 0)[1], px(0, 0)[2]);
}

cv::Scalar RandomColour(Rng& r, double smin = 0.2, double smax = 0.9, double vmin = 0.3,
                        double vmax = 0.95) {
  const double v = r.Uniform(vmin, vmax), s = r.Uniform(smin, smax), h = r.Uniform(0, 180);
  return Hsv(h, s, v);
}

cv::Scalar Shade(const cv::Scalar& c, double f) { return cv::Scalar(c[0] * f, c[1] * f, c[2] * f); }

// Adds smooth noise of the given feature size (pixels) and amplitude (grey levels).
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

void Brick(cv::Mat& img, Rng& r, const cv::Scalar& base, double ppm) {
  const double bw = 0.25 * ppm, bh = 0.075 * ppm;
  img.setTo(Shade(base, 0.75));  // mortar
  for (int row = 0; row * bh < img.rows; ++row) {
    const double off = (row % 2) * bw / 2;
    for (double x = -off; x < img.cols; x += bw) {
      const double f = r.Uniform(0.8, 1.15);
      cv::rectangle(img, cv::Point2d(x + 1, row * bh + 1),
                    cv::Point2d(x + bw - 1, (row + 1) * bh - 1), Shade(base, f), -1);
    }
  }
}

void Panels(cv::Mat& img, Rng& r, const cv::Scalar& base, double ppm) {
  img.setTo(base);
  const double pw = r.Uniform(1.2, 2.0) * ppm, ph = r.Uniform(0.8, 1.4) * ppm;
  for (double y = 0; y < img.rows; y += ph)
    for (double x = 0; x < img.cols; x += pw)
      cv::rectangle(img, cv::Point2d(x, y), cv::Point2d(x + pw, y + ph),
                    Shade(base, r.Uniform(0.72, 1.22)), -1);
  for (double y = 0; y < img.rows; y += ph)
    cv::line(img, {0, int(y)}, {img.cols, int(y)}, Shade(base, 0.55), 2);
  for (double x = 0; x < img.cols; x += pw)
    cv::line(img, {int(x), 0}, {int(x), img.rows}, Shade(base, 0.55), 2);
}

void Window(cv::Mat& img, Rng& r, cv::Rect2d w, const cv::Scalar& frame, double ppm) {
  const double gv = r.Uniform(0.12, 0.4), gs = r.Uniform(0.1, 0.45), gh = r.Uniform(95, 125);
  const cv::Scalar glass = Hsv(gh, gs, gv);
  cv::rectangle(img, w, frame, -1);
  const double b = 0.07 * ppm;
  cv::Rect2d pane(w.x + b, w.y + b, w.width - 2 * b, w.height - 2 * b);
  cv::rectangle(img, pane, glass, -1);
  // Sky reflection: a light diagonal wedge of random slope.
  const double k = r.Uniform(0.2, 0.8);
  std::vector<cv::Point> wedge{{int(pane.x), int(pane.y + pane.height * k)},
                               {int(pane.x + pane.width * k), int(pane.y)},
                               {int(pane.x + pane.width * std::min(1.0, k + 0.3)), int(pane.y)},
                               {int(pane.x), int(pane.y + pane.height * std::min(1.0, k + 0.4))}};
  cv::fillConvexPoly(img, wedge, Shade(glass, r.Uniform(1.4, 2.2)), cv::LINE_AA);
  switch (r.Int(0, 4)) {
    case 0: {  // curtains
      const cv::Scalar c = RandomColour(r, 0.3, 0.9, 0.4, 0.9);
      cv::rectangle(img, cv::Rect2d(pane.x, pane.y, pane.width * r.Uniform(0.15, 0.4), pane.height),
                    c, -1);
      cv::rectangle(
          img,
          cv::Rect2d(pane.x + pane.width * r.Uniform(0.6, 0.85), pane.y, pane.width, pane.height) &
              pane,
          c, -1);
      break;
    }
    case 1: {  // blinds down to a random height
      const double h = pane.height * r.Uniform(0.2, 0.9);
      const double cv_ = r.Uniform(0.6, 0.95), ch = r.Uniform(0, 180);
      const cv::Scalar c = Hsv(ch, 0.15, cv_);
      for (double y = pane.y; y < pane.y + h; y += 0.05 * ppm)
        cv::line(img, cv::Point2d(pane.x, y), cv::Point2d(pane.x + pane.width, y), c, 1,
                 cv::LINE_AA);
      break;
    }
    case 2: {  // a plant on the sill
      for (int i = 0; i < 12; ++i) {
        const double lv = r.Uniform(0.25, 0.6), lh = r.Uniform(35, 75), angle = r.Uniform(0, 180);
        const double sh = r.Uniform(1, 4), sw = r.Uniform(2, 6);
        const double fy = r.Uniform(0.6, 0.95), fx = r.Uniform(0.2, 0.8);
        cv::ellipse(img, cv::Point2d(pane.x + pane.width * fx, pane.y + pane.height * fy),
                    cv::Size2d(sw, sh), angle, 0, 360, Hsv(lh, 0.7, lv), -1, cv::LINE_AA);
      }
      break;
    }
    case 3:  // lit lamp inside
    {
      const double lamp_r = r.Uniform(2, 5), fy = r.Uniform(0.15, 0.4), fx = r.Uniform(0.2, 0.8);
      cv::circle(img, cv::Point2d(pane.x + pane.width * fx, pane.y + pane.height * fy),
                 static_cast<int>(lamp_r), cv::Scalar(170, 230, 250), -1, cv::LINE_AA);
      break;
    }
    default:
      break;
  }
  // Mullions: one, two or none.
  const int m = r.Int(0, 2);
  for (int i = 1; i <= m; ++i) {
    const double x = pane.x + pane.width * i / (m + 1);
    cv::line(img, cv::Point2d(x, pane.y), cv::Point2d(x, pane.y + pane.height), frame,
             std::max(1, int(0.04 * ppm)));
  }
  // Sill.
  cv::rectangle(img, cv::Rect2d(w.x - 0.05 * ppm, w.y + w.height, w.width + 0.1 * ppm, 0.06 * ppm),
                Shade(frame, 0.8), -1);
}

void Poster(cv::Mat& img, Rng& r, cv::Rect2d p, const GlyphSet& glyphs) {
  const cv::Scalar bg = RandomColour(r, 0.2, 0.9, 0.5, 0.95);
  cv::rectangle(img, p, bg, -1);
  for (int i = 0, n = r.Int(2, 5); i < n; ++i) {
    const cv::Scalar c = RandomColour(r);
    const double fy = r.Uniform(0.2, 0.8), fx = r.Uniform(0.15, 0.85);
    const cv::Point2d centre(p.x + p.width * fx, p.y + p.height * fy);
    const double rad = p.width * r.Uniform(0.08, 0.3);
    if (r.Chance(0.5)) {
      cv::circle(img, centre, static_cast<int>(rad), c, -1, cv::LINE_AA);
    } else {
      std::vector<cv::Point> tri{
          {int(centre.x), int(centre.y - rad)},
          {int(centre.x + rad), int(centre.y + rad)},
          {int(centre.x - rad * r.Uniform(0.3, 1.2)), int(centre.y + rad * r.Uniform(0.2, 1))}};
      cv::fillConvexPoly(img, tri, c, cv::LINE_AA);
    }
  }
  const cv::Scalar ink = RandomColour(r, 0.5, 1.0, 0.05, 0.4);
  const uint64_t text_seed = r.Next();
  const int letters = r.Int(3, 6);
  glyphs.DrawText(img, {p.x + p.width * 0.08, p.y + p.height * 0.06}, p.height * 0.12, letters,
                  text_seed, ink, 2);
  cv::rectangle(img, p, Shade(bg, 0.5), 1);
}

void ShopFront(cv::Mat& img, Rng& r, double x0, double x1, double floor_h, double ppm,
               const GlyphSet& glyphs) {
  const double top = img.rows - floor_h;
  const cv::Scalar frame = RandomColour(r, 0.2, 0.8, 0.15, 0.7);
  // Sign board with invented lettering.
  const cv::Rect2d board(x0 + 0.2 * ppm, top + 0.15 * ppm, (x1 - x0) - 0.4 * ppm, 0.6 * ppm);
  const cv::Scalar board_c = RandomColour(r, 0.3, 1.0, 0.2, 0.9);
  cv::rectangle(img, board, board_c, -1);
  const uint64_t sign_seed = r.Next();
  const int sign_letters = r.Int(4, 9);
  const double sign_x = r.Uniform(0.1, 0.6);
  glyphs.DrawText(img, {board.x + sign_x * ppm, board.y + 0.1 * ppm}, 0.4 * ppm, sign_letters,
                  sign_seed,
                  board_c[0] + board_c[1] + board_c[2] > 380 ? cv::Scalar(30, 30, 30)
                                                             : cv::Scalar(240, 240, 240),
                  std::max(2, int(0.05 * ppm)));
  // Display window with goods, and a door.
  const double door_w = 1.0 * ppm, win_top = top + 0.95 * ppm, bottom = img.rows - 0.35 * ppm;
  const double door_x = r.Chance(0.5) ? x0 + 0.4 * ppm : x1 - 0.4 * ppm - door_w;
  cv::rectangle(img, cv::Rect2d(x0 + 0.2 * ppm, win_top, (x1 - x0) - 0.4 * ppm, bottom - win_top),
                frame, -1);
  const cv::Rect2d glass(x0 + 0.3 * ppm, win_top + 0.1 * ppm, (x1 - x0) - 0.6 * ppm,
                         bottom - win_top - 0.2 * ppm);
  const double glass_v = r.Uniform(0.15, 0.35), glass_h = r.Uniform(90, 130);
  cv::rectangle(img, glass, Hsv(glass_h, 0.3, glass_v), -1);
  for (int i = 0, n = r.Int(6, 18); i < n; ++i) {
    const double fy = r.Uniform(0.3, 1.0), fx = r.Unit();
    const cv::Point2d c(glass.x + glass.width * fx, glass.y + glass.height * fy);
    const cv::Scalar goods = RandomColour(r, 0.3, 1.0, 0.3, 1.0);
    const double gh = r.Uniform(0.1, 0.6), gw = r.Uniform(0.1, 0.5);
    cv::rectangle(img, cv::Rect2d(c.x, c.y, gw * ppm, -gh * ppm) & glass, goods, -1);
  }
  cv::rectangle(img,
                cv::Rect2d(door_x, win_top - 0.2 * ppm, door_w, img.rows - win_top + 0.2 * ppm),
                Shade(frame, 0.6), -1);
  cv::rectangle(
      img, cv::Rect2d(door_x + 0.12 * ppm, win_top, door_w - 0.24 * ppm, (bottom - win_top) * 0.7),
      Hsv(110, 0.2, 0.2), -1);
  cv::circle(img, cv::Point2d(door_x + door_w * 0.8, win_top + (bottom - win_top) * 0.75), 3,
             cv::Scalar(60, 190, 220), -1);
}

}  // namespace

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

cv::Mat PaintFacade(const FacadeSpec& spec, const GlyphSet& glyphs) {
  Rng r(spec.seed);
  const double ppm = kFacadeTexelsPerM;
  cv::Mat img(std::max(8, int(spec.height_m * ppm)), std::max(8, int(spec.width_m * ppm)), CV_8UC3);
  const double wv = r.Uniform(0.45, 0.88), ws = r.Uniform(0.1, 0.55), wh = r.Uniform(0, 180);
  const cv::Scalar wall = Hsv(wh, ws, wv);
  switch (r.Int(0, 2)) {
    case 0:
      img.setTo(wall);
      AddNoise(img, r, 0.8 * ppm, 12);
      AddNoise(img, r, 0.08 * ppm, 16);  // stucco grain
      Speckle(img, r, img.total() / 120, 3.5, 0.2);
      break;
    case 1: {
      const double bv = r.Uniform(0.4, 0.75), bs = r.Uniform(0.4, 0.7), bh = r.Uniform(0, 20);
      Brick(img, r, Hsv(bh, bs, bv), ppm);
      AddNoise(img, r, 1.5 * ppm, 8);
      for (int i = 0, n = int(spec.width_m * spec.height_m / 12); i < n;
           ++i)  // plaster patches over the brick
      {
        const double pv = r.Uniform(0.55, 0.85), ps = r.Uniform(0.05, 0.3), ph = r.Uniform(10, 30);
        const double angle = r.Uniform(0, 180), eh = r.Uniform(0.08, 0.3), ew = r.Uniform(0.1, 0.5);
        const double y = r.Uniform(0, img.rows), x = r.Uniform(0, img.cols);
        cv::ellipse(img, cv::Point2d(x, y), cv::Size2d(ew * ppm, eh * ppm), angle, 0, 360,
                    Hsv(ph, ps, pv), -1, cv::LINE_AA);
      }
      break;
    }
    default:
      Panels(img, r, wall, ppm);
      AddNoise(img, r, 1.0 * ppm, 7);
      break;
  }
  Speckle(img, r, static_cast<int>(img.total() / 400), 3.0,
          0.25);  // grime and chips on every material
  const double floor_h = (spec.height_m - 0.6) / spec.floors;
  const cv::Scalar frame = RandomColour(r, 0.0, 0.5, 0.2, 0.95);
  // Cornice and floor bands.
  cv::rectangle(img, cv::Rect2d(0, 0, img.cols, 0.35 * ppm), Shade(wall, 0.7), -1);
  for (int f = 1; f < spec.floors; ++f) {
    const double y = img.rows - f * floor_h * ppm;
    if (r.Chance(0.6))
      cv::rectangle(img, cv::Rect2d(0, y - 0.08 * ppm, img.cols, 0.16 * ppm),
                    Shade(wall, r.Uniform(0.7, 1.2)), -1);
  }
  // Upper floors: a column grid per building, each window its own.
  const double spacing = r.Uniform(1.9, 3.0), win_w = r.Uniform(0.9, 1.4),
               win_h = r.Uniform(1.2, 1.8);
  const int cols = std::max(1, int((spec.width_m - 0.8) / spacing));
  const double margin = (spec.width_m - cols * spacing) / 2;
  for (int f = 1; f < spec.floors; ++f) {
    const double base_y = img.rows - f * floor_h * ppm - 0.9 * ppm;  // sill height 0.9 m
    for (int c = 0; c < cols; ++c) {
      if (r.Chance(0.08)) continue;  // a blank bay breaks the grid
      const double x = (margin + c * spacing + (spacing - win_w) / 2) * ppm;
      const double hh = win_h * (r.Chance(0.15) ? 1.3 : 1.0);
      // Each window its own: size, position and frame tint vary a little, so no two windows of
      // a facade share a descriptor (identical windows would defeat the ratio test).
      const double jw = win_w * r.Uniform(0.9, 1.1), jx = x + r.Uniform(-0.08, 0.08) * ppm;
      const double jy = base_y + r.Uniform(-0.05, 0.05) * ppm;
      Window(img, r, cv::Rect2d(jx, jy - hh * ppm, jw * ppm, hh * ppm),
             Shade(frame, r.Uniform(0.75, 1.2)), ppm);
      if (r.Chance(0.6)) {  // a rain streak below the sill, its own width and length
        const double sw = jw * r.Uniform(0.2, 0.8) * ppm, sl = r.Uniform(0.3, 1.4) * ppm;
        const double sx0 = jx + r.Uniform(0, std::max(1.0, jw * ppm - sw));
        for (int k = 0; k < 3; ++k) {  // narrower and shorter each step: darkest at the middle top
          const cv::Rect2d streak(sx0 + k * sw / 6, jy + 0.08 * ppm, sw * (1 - k / 3.0),
                                  sl * (1 - k / 4.0));
          cv::Mat roi = img(cv::Rect(streak) & cv::Rect(0, 0, img.cols, img.rows));
          roi.convertTo(roi, -1, r.Uniform(0.8, 0.92), 0);
        }
      }
      if (r.Chance(0.3)) {  // open shutters in a colour of their own
        const cv::Scalar sc = RandomColour(r, 0.3, 0.9, 0.25, 0.85);
        cv::rectangle(img, cv::Rect2d(jx - 0.38 * ppm, jy - hh * ppm, 0.34 * ppm, hh * ppm), sc,
                      -1);
        cv::rectangle(img, cv::Rect2d(jx + (jw + 0.04) * ppm, jy - hh * ppm, 0.34 * ppm, hh * ppm),
                      sc, -1);
        for (double ly = jy - hh * ppm + 3; ly < jy; ly += 5)
          cv::line(img, cv::Point2d(jx - 0.36 * ppm, ly), cv::Point2d(jx - 0.06 * ppm, ly),
                   Shade(sc, 0.6), 1);
      }
      if (r.Chance(0.1)) {  // an air-conditioning unit or a satellite dish beside the window
        const cv::Point2d p(x + (win_w + 0.15) * ppm, base_y - r.Uniform(0.2, 1.2) * ppm);
        cv::rectangle(img, cv::Rect2d(p.x, p.y, 0.6 * ppm, 0.45 * ppm), cv::Scalar(205, 205, 200),
                      -1);
        for (double gy = p.y + 4; gy < p.y + 0.45 * ppm; gy += 4)
          cv::line(img, cv::Point2d(p.x + 3, gy), cv::Point2d(p.x + 0.6 * ppm - 3, gy),
                   cv::Scalar(120, 120, 120), 1);
      }
      if (r.Chance(0.2))  // flower box or balcony rail
        cv::rectangle(
            img, cv::Rect2d(x - 0.1 * ppm, base_y - 0.05 * ppm, (win_w + 0.2) * ppm, 0.25 * ppm),
            RandomColour(r, 0.3, 0.9, 0.2, 0.8), -1);
    }
  }
  // Ground floor: shops or a residential door with small windows.
  const double gx0 = 0.3 * ppm, gx1 = img.cols - 0.3 * ppm;
  if (r.Chance(0.7) && spec.width_m > 5) {
    const int shops = spec.width_m > 14 && r.Chance(0.5) ? 2 : 1;
    for (int s = 0; s < shops; ++s)
      ShopFront(img, r, gx0 + (gx1 - gx0) * s / shops,
                gx0 + (gx1 - gx0) * (s + 1) / shops - 0.3 * ppm, floor_h * ppm, ppm, glyphs);
  } else {
    const double door_x = r.Uniform(0.2, 0.7) * img.cols;
    cv::rectangle(img, cv::Rect2d(door_x, img.rows - 2.3 * ppm, 1.1 * ppm, 2.3 * ppm),
                  RandomColour(r, 0.2, 0.8, 0.1, 0.5), -1);
    glyphs.DrawText(img, {door_x + 1.3 * ppm, img.rows - 2.0 * ppm}, 0.2 * ppm, 2, r.Next(),
                    cv::Scalar(240, 240, 240), 2);
    for (double x = 0.6 * ppm; x < img.cols - 1.5 * ppm; x += r.Uniform(2.0, 3.0) * ppm)
      if (std::abs(x - door_x) > 1.6 * ppm)
        Window(img, r, cv::Rect2d(x, img.rows - 2.2 * ppm, 1.0 * ppm, 1.1 * ppm), frame, ppm);
  }
  // Posters low on the wall, a drainpipe, graffiti, grime at the foot of the wall.
  for (int i = 0, n = r.Int(1, 5); i < n; ++i) {
    const double pw = r.Uniform(0.5, 0.9) * ppm;
    const double up = r.Uniform(1.4, 2.4), px = r.Uniform(0, img.cols - pw);
    Poster(img, r, cv::Rect2d(px, img.rows - up * ppm, pw, pw * 1.4), glyphs);
  }
  if (r.Chance(0.6)) {
    const double x = r.Chance(0.5) ? 0.15 * ppm : img.cols - 0.2 * ppm;
    cv::line(img, cv::Point2d(x, 0), cv::Point2d(x, img.rows), Shade(wall, 0.5),
             std::max(2, int(0.08 * ppm)));
  }
  if (r.Chance(0.35)) {
    const cv::Scalar c = RandomColour(r, 0.7, 1.0, 0.5, 1.0);
    std::vector<cv::Point> pts;
    double x = r.Uniform(0, img.cols * 0.7), y = img.rows - r.Uniform(0.5, 1.2) * ppm;
    for (int i = 0; i < 10; ++i, x += r.Uniform(3, 14), y += r.Uniform(-8, 8))
      pts.emplace_back(int(x), int(y));
    cv::polylines(img, pts, false, c, 3, cv::LINE_AA);
  }
  for (int i = 0, n = int(spec.width_m * spec.height_m / 4); i < n; ++i) {  // weathering stains
    const double shade = r.Uniform(0.6, 1.25), angle = r.Uniform(0, 180);
    const double h = r.Uniform(2, 10), w = r.Uniform(3, 14);
    const double y = r.Uniform(0, img.rows), x = r.Uniform(0, img.cols);
    cv::ellipse(img, cv::Point2d(x, y), cv::Size2d(w, h), angle, 0, 360, Shade(wall, shade), -1,
                cv::LINE_AA);
  }
  for (int i = 0; i < 20; ++i) {
    const double shade = r.Uniform(0.5, 0.8), h = r.Uniform(2, 8), w = r.Uniform(4, 20);
    const double up = r.Uniform(0, 0.4), x = r.Uniform(0, img.cols);
    cv::ellipse(img, cv::Point2d(x, img.rows - up * ppm), cv::Size2d(w, h), 0, 0, 360,
                Shade(wall, shade), -1, cv::LINE_AA);
  }
  return img;
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

cv::Mat PaintVehicle(double length_m, double height_m, uint64_t seed, int face,
                     const GlyphSet& glyphs) {
  Rng r(seed);  // same seed for every face: one body colour per vehicle
  const cv::Scalar body = RandomColour(r, 0.0, 0.9, 0.2, 0.95);
  const double ppm = kObjectTexelsPerM;
  Rng rf(HashSeed(seed, face));
  cv::Mat img(std::max(4, int(height_m * ppm)), std::max(4, int(length_m * ppm)), CV_8UC3, body);
  AddNoise(img, rf, 0.5 * ppm, 4);
  const double glass_top = 0.08 * img.rows, glass_bottom = 0.45 * img.rows;
  const cv::Scalar glass = Hsv(105, 0.25, 0.18);
  if (face == 4) return img;     // roof
  if (face == 0 || face == 1) {  // long sides
    cv::rectangle(img,
                  cv::Rect2d(0.12 * img.cols, glass_top, 0.76 * img.cols, glass_bottom - glass_top),
                  glass, -1);
    cv::line(img, cv::Point2d(0.5 * img.cols, glass_top),
             cv::Point2d(0.5 * img.cols, img.rows * 0.85), Shade(body, 0.5), 2);
    for (double wx : {0.2, 0.8}) {  // wheels: tyre and hub
      const cv::Point2d hub(wx * img.cols, img.rows - 0.3 * ppm);
      cv::circle(img, hub, int(0.32 * ppm), cv::Scalar(25, 25, 25), -1, cv::LINE_AA);
      cv::circle(img, hub, int(0.16 * ppm), cv::Scalar(150, 150, 150), -1, cv::LINE_AA);
    }
    if (rf.Chance(0.45)) {  // a livery stripe with invented lettering
      const cv::Scalar c = RandomColour(rf, 0.6, 1.0, 0.3, 1.0);
      cv::rectangle(
          img, cv::Rect2d(0.1 * img.cols, 0.55 * img.rows, 0.8 * img.cols, 0.12 * img.rows), c, -1);
      const uint64_t text_seed = rf.Next();
      const int letters = rf.Int(3, 6);
      glyphs.DrawText(img, {0.25 * img.cols, 0.7 * img.rows}, 0.14 * img.rows, letters, text_seed,
                      Shade(c, 0.4), 2);
    }
  } else {  // ends: window, lights, plate
    cv::rectangle(img,
                  cv::Rect2d(0.1 * img.cols, glass_top, 0.8 * img.cols, glass_bottom - glass_top),
                  glass, -1);
    const cv::Scalar light = face == 2 ? cv::Scalar(220, 235, 240) : cv::Scalar(40, 40, 200);
    for (double lx : {0.08, 0.78})
      cv::rectangle(img,
                    cv::Rect2d(lx * img.cols, 0.55 * img.rows, 0.14 * img.cols, 0.1 * img.rows),
                    light, -1);
    const cv::Rect2d plate(0.35 * img.cols, 0.7 * img.rows, 0.3 * img.cols, 0.1 * img.rows);
    cv::rectangle(img, plate, cv::Scalar(235, 235, 235), -1);
    glyphs.DrawText(img, {plate.x + 3, plate.y + 2}, plate.height - 4, 5, rf.Next(),
                    cv::Scalar(20, 20, 20), 1);
  }
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
