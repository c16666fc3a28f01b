#include "demo_route/facade_elements.h"

#include <algorithm>
#include <opencv2/imgproc.hpp>
#include <vector>

#include "demo_route/paint_primitives.h"

namespace sightfix::demo {
namespace {

// Sky reflection: a light diagonal wedge of random slope across the pane.
void PaintSkyReflection(cv::Mat& img, Rng& r, const cv::Rect2d& pane, const cv::Scalar& glass) {
  const double k = r.Uniform(0.2, 0.8);
  std::vector<cv::Point> wedge{{int(pane.x), int(pane.y + pane.height * k)},
                               {int(pane.x + pane.width * k), int(pane.y)},
                               {int(pane.x + pane.width * std::min(1.0, k + 0.3)), int(pane.y)},
                               {int(pane.x), int(pane.y + pane.height * std::min(1.0, k + 0.4))}};
  cv::fillConvexPoly(img, wedge, Shade(glass, r.Uniform(1.4, 2.2)), cv::LINE_AA);
}

void PaintCurtains(cv::Mat& img, Rng& r, const cv::Rect2d& pane) {
  const cv::Scalar c = RandomColour(r, 0.3, 0.9, 0.4, 0.9);
  cv::rectangle(img, cv::Rect2d(pane.x, pane.y, pane.width * r.Uniform(0.15, 0.4), pane.height), c,
                -1);
  cv::rectangle(
      img,
      cv::Rect2d(pane.x + pane.width * r.Uniform(0.6, 0.85), pane.y, pane.width, pane.height) &
          pane,
      c, -1);
}

// Blinds let down to a random height.
void PaintBlinds(cv::Mat& img, Rng& r, const cv::Rect2d& pane, double ppm) {
  const double h = pane.height * r.Uniform(0.2, 0.9);
  const double value = r.Uniform(0.6, 0.95), hue = r.Uniform(0, 180);
  const cv::Scalar c = Hsv(hue, 0.15, value);
  for (double y = pane.y; y < pane.y + h; y += 0.05 * ppm)
    cv::line(img, cv::Point2d(pane.x, y), cv::Point2d(pane.x + pane.width, y), c, 1, cv::LINE_AA);
}

// A plant on the sill: a dozen leaves low in the pane.
void PaintSillPlant(cv::Mat& img, Rng& r, const cv::Rect2d& pane) {
  for (int i = 0; i < 12; ++i) {
    const double lv = r.Uniform(0.25, 0.6), lh = r.Uniform(35, 75), angle = r.Uniform(0, 180);
    const double sh = r.Uniform(1, 4), sw = r.Uniform(2, 6);
    const double fy = r.Uniform(0.6, 0.95), fx = r.Uniform(0.2, 0.8);
    cv::ellipse(img, cv::Point2d(pane.x + pane.width * fx, pane.y + pane.height * fy),
                cv::Size2d(sw, sh), angle, 0, 360, Hsv(lh, 0.7, lv), -1, cv::LINE_AA);
  }
}

// A lit lamp inside, high in the pane.
void PaintLamp(cv::Mat& img, Rng& r, const cv::Rect2d& pane) {
  const double lamp_r = r.Uniform(2, 5), fy = r.Uniform(0.15, 0.4), fx = r.Uniform(0.2, 0.8);
  cv::circle(img, cv::Point2d(pane.x + pane.width * fx, pane.y + pane.height * fy),
             static_cast<int>(lamp_r), cv::Scalar(170, 230, 250), -1, cv::LINE_AA);
}

// What is seen behind the glass: one of four things, or (one time in five) nothing.
void PaintBehindGlass(cv::Mat& img, Rng& r, const cv::Rect2d& pane, double ppm) {
  switch (r.Int(0, 4)) {
    case 0:
      PaintCurtains(img, r, pane);
      break;
    case 1:
      PaintBlinds(img, r, pane, ppm);
      break;
    case 2:
      PaintSillPlant(img, r, pane);
      break;
    case 3:
      PaintLamp(img, r, pane);
      break;
    default:
      break;
  }
}

// Mullions (one, two or none) across the pane, and the sill under the window w.
void PaintMullionsAndSill(cv::Mat& img, Rng& r, const cv::Rect2d& w, const cv::Rect2d& pane,
                          const cv::Scalar& frame, double ppm) {
  const int m = r.Int(0, 2);
  for (int i = 1; i <= m; ++i) {
    const double x = pane.x + pane.width * i / (m + 1);
    cv::line(img, cv::Point2d(x, pane.y), cv::Point2d(x, pane.y + pane.height), frame,
             std::max(1, int(0.04 * ppm)));
  }
  cv::rectangle(img, cv::Rect2d(w.x - 0.05 * ppm, w.y + w.height, w.width + 0.1 * ppm, 0.06 * ppm),
                Shade(frame, 0.8), -1);
}

// One shape of a poster: a disc or a triangle of colour c about `centre`, size rad.
void PaintPosterShape(cv::Mat& img, Rng& r, const cv::Point2d& centre, double rad,
                      const cv::Scalar& c) {
  if (r.Chance(0.5)) {
    cv::circle(img, centre, static_cast<int>(rad), c, -1, cv::LINE_AA);
    return;
  }
  std::vector<cv::Point> tri{
      {int(centre.x), int(centre.y - rad)},
      {int(centre.x + rad), int(centre.y + rad)},
      {int(centre.x - rad * r.Uniform(0.3, 1.2)), int(centre.y + rad * r.Uniform(0.2, 1))}};
  cv::fillConvexPoly(img, tri, c, cv::LINE_AA);
}

// The shop's sign board across the top of the ground floor, lettered in light or dark ink
// against its colour.
void PaintShopSign(cv::Mat& img, Rng& r, double x0, double x1, double top, double ppm,
                   const GlyphSet& glyphs) {
  const cv::Rect2d board(x0 + 0.2 * ppm, top + 0.15 * ppm, (x1 - x0) - 0.4 * ppm, 0.6 * ppm);
  const cv::Scalar board_c = RandomColour(r, 0.3, 1.0, 0.2, 0.9);
  cv::rectangle(img, board, board_c, -1);
  const uint64_t sign_seed = r.Next();
  const int sign_letters = r.Int(4, 9);
  const double sign_x = r.Uniform(0.1, 0.6);
  const cv::Scalar ink = board_c[0] + board_c[1] + board_c[2] > 380 ? cv::Scalar(30, 30, 30)
                                                                    : cv::Scalar(240, 240, 240);
  glyphs.DrawText(img, {board.x + sign_x * ppm, board.y + 0.1 * ppm}, 0.4 * ppm, sign_letters,
                  sign_seed, ink, std::max(2, int(0.05 * ppm)));
}

// The display window in its frame, from win_top down to bottom, with goods behind the glass.
void PaintDisplayWindow(cv::Mat& img, Rng& r, double x0, double x1, double win_top, double bottom,
                        const cv::Scalar& frame, double ppm) {
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
}

// The shop door (door_w wide at door_x, down to the foot of the image): frame, glass, handle.
void PaintShopDoor(cv::Mat& img, double door_x, double door_w, double win_top, double bottom,
                   const cv::Scalar& frame, double ppm) {
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

void PaintWindow(cv::Mat& img, Rng& r, cv::Rect2d w, const cv::Scalar& frame, double ppm) {
  const double gv = r.Uniform(0.12, 0.4), gs = r.Uniform(0.1, 0.45), gh = r.Uniform(95, 125);
  const cv::Scalar glass = Hsv(gh, gs, gv);
  cv::rectangle(img, w, frame, -1);
  const double b = 0.07 * ppm;
  const cv::Rect2d pane(w.x + b, w.y + b, w.width - 2 * b, w.height - 2 * b);
  cv::rectangle(img, pane, glass, -1);
  PaintSkyReflection(img, r, pane, glass);
  PaintBehindGlass(img, r, pane, ppm);
  PaintMullionsAndSill(img, r, w, pane, frame, ppm);
}

void PaintPoster(cv::Mat& img, Rng& r, cv::Rect2d p, const GlyphSet& glyphs) {
  const cv::Scalar bg = RandomColour(r, 0.2, 0.9, 0.5, 0.95);
  cv::rectangle(img, p, bg, -1);
  for (int i = 0, n = r.Int(2, 5); i < n; ++i) {
    const cv::Scalar c = RandomColour(r);
    const double fy = r.Uniform(0.2, 0.8), fx = r.Uniform(0.15, 0.85);
    const cv::Point2d centre(p.x + p.width * fx, p.y + p.height * fy);
    const double rad = p.width * r.Uniform(0.08, 0.3);
    PaintPosterShape(img, r, centre, rad, c);
  }
  const cv::Scalar ink = RandomColour(r, 0.5, 1.0, 0.05, 0.4);
  const uint64_t text_seed = r.Next();
  const int letters = r.Int(3, 6);
  glyphs.DrawText(img, {p.x + p.width * 0.08, p.y + p.height * 0.06}, p.height * 0.12, letters,
                  text_seed, ink, 2);
  cv::rectangle(img, p, Shade(bg, 0.5), 1);
}

void PaintShopFront(cv::Mat& img, Rng& r, double x0, double x1, double floor_h, double ppm,
                    const GlyphSet& glyphs) {
  const double top = img.rows - floor_h;
  const cv::Scalar frame = RandomColour(r, 0.2, 0.8, 0.15, 0.7);
  PaintShopSign(img, r, x0, x1, top, ppm, glyphs);
  const double door_w = 1.0 * ppm, win_top = top + 0.95 * ppm, bottom = img.rows - 0.35 * ppm;
  const double door_x = r.Chance(0.5) ? x0 + 0.4 * ppm : x1 - 0.4 * ppm - door_w;
  PaintDisplayWindow(img, r, x0, x1, win_top, bottom, frame, ppm);
  PaintShopDoor(img, door_x, door_w, win_top, bottom, frame, ppm);
}

}  // namespace sightfix::demo
