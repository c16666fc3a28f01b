// PaintFacade (declared in town_painter.h), layer by layer: the wall's material, floor bands,
// the window bays of the upper floors, the ground floor, posters, and weathering. The layers
// draw in this order and from one Rng, so their order is part of the texture.
#include <algorithm>
#include <cmath>
#include <opencv2/imgproc.hpp>
#include <vector>

#include "demo_route/facade_elements.h"
#include "demo_route/paint_primitives.h"
#include "demo_route/random.h"
#include "demo_route/town_painter.h"

namespace sightfix::demo {
namespace {

constexpr double kPpm = kFacadeTexelsPerM;
// A chain's shop front: its width and the height of its ground floor, metres, the same on every
// building so the fronts come out alike texel for texel.
constexpr double kChainFrontM = 5.4, kChainFloorM = 3.4;

// Brick courses of 0.25 x 0.075 m bricks, each its own shade, on mortar.
void PaintBrick(cv::Mat& img, Rng& r, const cv::Scalar& base) {
  const double bw = 0.25 * kPpm, bh = 0.075 * kPpm;
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

// Cladding panels of one random size, each its own shade, with dark joints.
void PaintPanels(cv::Mat& img, Rng& r, const cv::Scalar& base) {
  img.setTo(base);
  const double pw = r.Uniform(1.2, 2.0) * kPpm, ph = r.Uniform(0.8, 1.4) * kPpm;
  for (double y = 0; y < img.rows; y += ph)
    for (double x = 0; x < img.cols; x += pw)
      cv::rectangle(img, cv::Point2d(x, y), cv::Point2d(x + pw, y + ph),
                    Shade(base, r.Uniform(0.72, 1.22)), -1);
  for (double y = 0; y < img.rows; y += ph)
    cv::line(img, {0, int(y)}, {img.cols, int(y)}, Shade(base, 0.55), 2);
  for (double x = 0; x < img.cols; x += pw)
    cv::line(img, {int(x), 0}, {int(x), img.rows}, Shade(base, 0.55), 2);
}

void PaintStucco(cv::Mat& img, Rng& r, const cv::Scalar& wall) {
  img.setTo(wall);
  AddNoise(img, r, 0.8 * kPpm, 12);
  AddNoise(img, r, 0.08 * kPpm, 16);  // stucco grain
  Speckle(img, r, img.total() / 120, 3.5, 0.2);
}

// Brick in a colour of its own, with patches of plaster left on it.
void PaintPlasteredBrick(cv::Mat& img, Rng& r, const FacadeSpec& spec) {
  const double bv = r.Uniform(0.4, 0.75), bs = r.Uniform(0.4, 0.7), bh = r.Uniform(0, 20);
  PaintBrick(img, r, Hsv(bh, bs, bv));
  AddNoise(img, r, 1.5 * kPpm, 8);
  for (int i = 0, n = int(spec.width_m * spec.height_m / 12); i < n; ++i) {
    const double pv = r.Uniform(0.55, 0.85), ps = r.Uniform(0.05, 0.3), ph = r.Uniform(10, 30);
    const double angle = r.Uniform(0, 180), eh = r.Uniform(0.08, 0.3), ew = r.Uniform(0.1, 0.5);
    const double y = r.Uniform(0, img.rows), x = r.Uniform(0, img.cols);
    cv::ellipse(img, cv::Point2d(x, y), cv::Size2d(ew * kPpm, eh * kPpm), angle, 0, 360,
                Hsv(ph, ps, pv), -1, cv::LINE_AA);
  }
}

// The wall's material (stucco, brick or panels), then grime and chips on every material.
void PaintWallMaterial(cv::Mat& img, Rng& r, const FacadeSpec& spec, const cv::Scalar& wall) {
  switch (r.Int(0, 2)) {
    case 0:
      PaintStucco(img, r, wall);
      break;
    case 1:
      PaintPlasteredBrick(img, r, spec);
      break;
    default:
      PaintPanels(img, r, wall);
      AddNoise(img, r, 1.0 * kPpm, 7);
      break;
  }
  Speckle(img, r, static_cast<int>(img.total() / 400), 3.0, 0.25);
}

// The cornice along the top, and a band at some of the floor lines.
void PaintCorniceAndBands(cv::Mat& img, Rng& r, const FacadeSpec& spec, const cv::Scalar& wall,
                          double floor_h) {
  cv::rectangle(img, cv::Rect2d(0, 0, img.cols, 0.35 * kPpm), Shade(wall, 0.7), -1);
  for (int f = 1; f < spec.floors; ++f) {
    const double y = img.rows - f * floor_h * kPpm;
    if (r.Chance(0.6))
      cv::rectangle(img, cv::Rect2d(0, y - 0.08 * kPpm, img.cols, 0.16 * kPpm),
                    Shade(wall, r.Uniform(0.7, 1.2)), -1);
  }
}

// The column grid of a facade's upper floors, metres.
struct WindowGrid {
  double spacing, win_w, win_h;
  int cols;
  double margin;  // from the facade's left edge to the first column
};

WindowGrid PlanWindowGrid(Rng& r, const FacadeSpec& spec) {
  WindowGrid g;
  g.spacing = r.Uniform(1.9, 3.0);
  g.win_w = r.Uniform(0.9, 1.4);
  g.win_h = r.Uniform(1.2, 1.8);
  g.cols = std::max(1, int((spec.width_m - 0.8) / g.spacing));
  g.margin = (spec.width_m - g.cols * g.spacing) / 2;
  return g;
}

// One window of the grid as painted: its own size and place, texels except where named _m.
struct Bay {
  double grid_x;    // left edge of the grid's window
  double sill_y;    // the floor's sill line
  double x, y;      // this window's left edge and sill
  double w_m, h_m;  // this window's width and height
};

// A rain streak below the sill, its own width and length: three passes, each narrower and
// shorter, so it is darkest at the middle top.
void PaintRainStreak(cv::Mat& img, Rng& r, const Bay& bay) {
  const double sw = bay.w_m * r.Uniform(0.2, 0.8) * kPpm, sl = r.Uniform(0.3, 1.4) * kPpm;
  const double sx0 = bay.x + r.Uniform(0, std::max(1.0, bay.w_m * kPpm - sw));
  for (int k = 0; k < 3; ++k) {
    const cv::Rect2d streak(sx0 + k * sw / 6, bay.y + 0.08 * kPpm, sw * (1 - k / 3.0),
                            sl * (1 - k / 4.0));
    cv::Mat roi = img(cv::Rect(streak) & cv::Rect(0, 0, img.cols, img.rows));
    roi.convertTo(roi, -1, r.Uniform(0.8, 0.92), 0);
  }
}

// Open shutters either side of the window, in a colour of their own; the left one slatted.
void PaintShutters(cv::Mat& img, Rng& r, const Bay& bay) {
  const cv::Scalar sc = RandomColour(r, 0.3, 0.9, 0.25, 0.85);
  const double top = bay.y - bay.h_m * kPpm;
  cv::rectangle(img, cv::Rect2d(bay.x - 0.38 * kPpm, top, 0.34 * kPpm, bay.h_m * kPpm), sc, -1);
  cv::rectangle(img, cv::Rect2d(bay.x + (bay.w_m + 0.04) * kPpm, top, 0.34 * kPpm, bay.h_m * kPpm),
                sc, -1);
  for (double ly = top + 3; ly < bay.y; ly += 5)
    cv::line(img, cv::Point2d(bay.x - 0.36 * kPpm, ly), cv::Point2d(bay.x - 0.06 * kPpm, ly),
             Shade(sc, 0.6), 1);
}

// An air-conditioning unit with its grille beside the grid's window.
void PaintAirConditioner(cv::Mat& img, Rng& r, const Bay& bay, double win_w) {
  const cv::Point2d p(bay.grid_x + (win_w + 0.15) * kPpm, bay.sill_y - r.Uniform(0.2, 1.2) * kPpm);
  cv::rectangle(img, cv::Rect2d(p.x, p.y, 0.6 * kPpm, 0.45 * kPpm), cv::Scalar(205, 205, 200), -1);
  for (double gy = p.y + 4; gy < p.y + 0.45 * kPpm; gy += 4)
    cv::line(img, cv::Point2d(p.x + 3, gy), cv::Point2d(p.x + 0.6 * kPpm - 3, gy),
             cv::Scalar(120, 120, 120), 1);
}

// One bay: the window, each its own (size, position and frame tint vary a little, so no two
// windows of a facade share a descriptor: identical windows would defeat the ratio test), and
// by chance a rain streak, shutters, an air-conditioning unit, a flower box or balcony rail.
// *windows (if given) gets the window's rectangle, texels.
void PaintBay(cv::Mat& img, Rng& r, const WindowGrid& grid, double grid_x, double sill_y,
              const cv::Scalar& frame, std::vector<cv::Rect2d>* windows) {
  Bay bay;
  bay.grid_x = grid_x;
  bay.sill_y = sill_y;
  bay.h_m = grid.win_h * (r.Chance(0.15) ? 1.3 : 1.0);
  bay.w_m = grid.win_w * r.Uniform(0.9, 1.1);
  bay.x = grid_x + r.Uniform(-0.08, 0.08) * kPpm;
  bay.y = sill_y + r.Uniform(-0.05, 0.05) * kPpm;
  const cv::Rect2d window(bay.x, bay.y - bay.h_m * kPpm, bay.w_m * kPpm, bay.h_m * kPpm);
  if (windows) windows->push_back(window);
  PaintWindow(img, r, window, Shade(frame, r.Uniform(0.75, 1.2)), kPpm);
  if (r.Chance(0.6)) PaintRainStreak(img, r, bay);
  if (r.Chance(0.3)) PaintShutters(img, r, bay);
  if (r.Chance(0.1)) PaintAirConditioner(img, r, bay, grid.win_w);
  if (r.Chance(0.2))
    cv::rectangle(img,
                  cv::Rect2d(grid_x - 0.1 * kPpm, sill_y - 0.05 * kPpm, (grid.win_w + 0.2) * kPpm,
                             0.25 * kPpm),
                  RandomColour(r, 0.3, 0.9, 0.2, 0.8), -1);
}

// Upper floors: a column grid per building, one bay in twelve or so left blank.
void PaintUpperFloors(cv::Mat& img, Rng& r, const FacadeSpec& spec, const cv::Scalar& frame,
                      double floor_h, std::vector<cv::Rect2d>* windows) {
  const WindowGrid grid = PlanWindowGrid(r, spec);
  for (int f = 1; f < spec.floors; ++f) {
    const double sill_y = img.rows - f * floor_h * kPpm - 0.9 * kPpm;  // sill height 0.9 m
    for (int c = 0; c < grid.cols; ++c) {
      if (r.Chance(0.08)) continue;  // a blank bay breaks the grid
      const double x = (grid.margin + c * grid.spacing + (grid.spacing - grid.win_w) / 2) * kPpm;
      PaintBay(img, r, grid, x, sill_y, frame, windows);
    }
  }
}

// The door colours a terrace house may have instead of its design's (FacadeVariant::door_tint):
// red, blue, green, yellow (BGR).
const cv::Scalar kDoorTints[] = {{40, 40, 170}, {150, 70, 30}, {50, 120, 40}, {40, 180, 210}};

// A residential ground floor: a numbered door and small windows clear of it.
void PaintResidentialFloor(cv::Mat& img, Rng& r, const cv::Scalar& frame, int door_tint,
                           const GlyphSet& glyphs) {
  const double door_x = r.Uniform(0.2, 0.7) * img.cols;
  const cv::Scalar door = RandomColour(r, 0.2, 0.8, 0.1, 0.5);
  cv::rectangle(img, cv::Rect2d(door_x, img.rows - 2.3 * kPpm, 1.1 * kPpm, 2.3 * kPpm),
                door_tint >= 0 ? kDoorTints[door_tint % 4] : door, -1);
  glyphs.DrawText(img, {door_x + 1.3 * kPpm, img.rows - 2.0 * kPpm}, 0.2 * kPpm, 2, r.Next(),
                  cv::Scalar(240, 240, 240), 2);
  for (double x = 0.6 * kPpm; x < img.cols - 1.5 * kPpm; x += r.Uniform(2.0, 3.0) * kPpm)
    if (std::abs(x - door_x) > 1.6 * kPpm)
      PaintWindow(img, r, cv::Rect2d(x, img.rows - 2.2 * kPpm, 1.0 * kPpm, 1.1 * kPpm), frame,
                  kPpm);
}

// Ground floor: one or two shops, or a residential door with small windows.
void PaintGroundFloor(cv::Mat& img, Rng& r, const FacadeSpec& spec, const cv::Scalar& frame,
                      double floor_h, const GlyphSet& glyphs) {
  const double gx0 = 0.3 * kPpm, gx1 = img.cols - 0.3 * kPpm;
  if (!(r.Chance(0.7) && spec.width_m > 5) || spec.variant.residential) {
    PaintResidentialFloor(img, r, frame, spec.variant.door_tint, glyphs);
    return;
  }
  const int shops = spec.width_m > 14 && r.Chance(0.5) ? 2 : 1;
  for (int s = 0; s < shops; ++s)
    PaintShopFront(img, r, gx0 + (gx1 - gx0) * s / shops,
                   gx0 + (gx1 - gx0) * (s + 1) / shops - 0.3 * kPpm, floor_h * kPpm, kPpm, glyphs);
}

// Posters low on the wall, between 1.4 and 2.4 m up.
void PaintPosters(cv::Mat& img, Rng& r, const GlyphSet& glyphs) {
  for (int i = 0, n = r.Int(1, 5); i < n; ++i) {
    const double pw = r.Uniform(0.5, 0.9) * kPpm;
    const double up = r.Uniform(1.4, 2.4), px = r.Uniform(0, img.cols - pw);
    PaintPoster(img, r, cv::Rect2d(px, img.rows - up * kPpm, pw, pw * 1.4), glyphs);
  }
}

// A scrawl of graffiti low on the wall.
void PaintGraffiti(cv::Mat& img, Rng& r) {
  const cv::Scalar c = RandomColour(r, 0.7, 1.0, 0.5, 1.0);
  std::vector<cv::Point> pts;
  double x = r.Uniform(0, img.cols * 0.7), y = img.rows - r.Uniform(0.5, 1.2) * kPpm;
  for (int i = 0; i < 10; ++i, x += r.Uniform(3, 14), y += r.Uniform(-8, 8))
    pts.emplace_back(int(x), int(y));
  cv::polylines(img, pts, false, c, 3, cv::LINE_AA);
}

// Weathering stains all over the wall, and grime at its foot.
void PaintStains(cv::Mat& img, Rng& r, const FacadeSpec& spec, const cv::Scalar& wall) {
  for (int i = 0, n = int(spec.width_m * spec.height_m / 4); i < n; ++i) {
    const double shade = r.Uniform(0.6, 1.25), angle = r.Uniform(0, 180);
    const double h = r.Uniform(2, 10), w = r.Uniform(3, 14);
    const double y = r.Uniform(0, img.rows), x = r.Uniform(0, img.cols);
    cv::ellipse(img, cv::Point2d(x, y), cv::Size2d(w, h), angle, 0, 360, Shade(wall, shade), -1,
                cv::LINE_AA);
  }
  for (int i = 0; i < 20; ++i) {
    const double shade = r.Uniform(0.5, 0.8), h = r.Uniform(2, 8), w = r.Uniform(4, 20);
    const double up = r.Uniform(0, 0.4), x = r.Uniform(0, img.cols);
    cv::ellipse(img, cv::Point2d(x, img.rows - up * kPpm), cv::Size2d(w, h), 0, 0, 360,
                Shade(wall, shade), -1, cv::LINE_AA);
  }
}

// A drainpipe at one end (by chance), graffiti (by chance), stains and grime.
void PaintWeathering(cv::Mat& img, Rng& r, const FacadeSpec& spec, const cv::Scalar& wall) {
  if (r.Chance(0.6)) {
    const double x = r.Chance(0.5) ? 0.15 * kPpm : img.cols - 0.2 * kPpm;
    cv::line(img, cv::Point2d(x, 0), cv::Point2d(x, img.rows), Shade(wall, 0.5),
             std::max(2, int(0.08 * kPpm)));
  }
  if (r.Chance(0.35)) PaintGraffiti(img, r);
  PaintStains(img, r, spec, wall);
}

// A chain's shop fronts across the ground floor, over whatever was painted there: a fascia band,
// then as many kChainFrontM fronts as fit, centred, each painted from the chain's seed alone.
void PaintChainShops(cv::Mat& img, uint64_t chain_seed, const GlyphSet& glyphs) {
  const double floor_h = kChainFloorM * kPpm, front = kChainFrontM * kPpm;
  const int n = std::max(1, int((img.cols - 0.6 * kPpm) / front));
  Rng fascia(chain_seed);
  cv::rectangle(img, cv::Rect2d(0, img.rows - floor_h, img.cols, floor_h),
                RandomColour(fascia, 0.2, 0.6, 0.3, 0.8), -1);
  const double x0 = (img.cols - n * front) / 2;
  for (int i = 0; i < n; ++i) {
    Rng r(HashSeed(chain_seed, 1));
    PaintShopFront(img, r, x0 + i * front, x0 + (i + 1) * front - 0.3 * kPpm, floor_h, kPpm,
                   glyphs);
  }
}

}  // namespace

cv::Mat PaintFacade(const FacadeSpec& spec, const GlyphSet& glyphs,
                    std::vector<cv::Rect2d>* windows) {
  Rng r(spec.seed);
  cv::Mat img(std::max(8, int(spec.height_m * kPpm)), std::max(8, int(spec.width_m * kPpm)),
              CV_8UC3);
  const double wv = r.Uniform(0.45, 0.88), ws = r.Uniform(0.1, 0.55), wh = r.Uniform(0, 180);
  const cv::Scalar wall = Hsv(wh, ws, wv);
  PaintWallMaterial(img, r, spec, wall);
  const double floor_h = (spec.height_m - 0.6) / spec.floors;  // metres
  const cv::Scalar frame = RandomColour(r, 0.0, 0.5, 0.2, 0.95);
  PaintCorniceAndBands(img, r, spec, wall, floor_h);
  PaintUpperFloors(img, r, spec, frame, floor_h, windows);
  PaintGroundFloor(img, r, spec, frame, floor_h, glyphs);
  PaintPosters(img, r, glyphs);
  PaintWeathering(img, r, spec, wall);
  if (spec.variant.chain_shop_seed != 0) PaintChainShops(img, spec.variant.chain_shop_seed, glyphs);
  return img;
}

}  // namespace sightfix::demo

namespace sightfix::demo {

cv::Mat PaintLitWindows(const FacadeSpec& spec, const GlyphSet& glyphs, double lit_share) {
  std::vector<cv::Rect2d> windows;
  const cv::Mat facade = PaintFacade(spec, glyphs, &windows);
  cv::Mat img(facade.size(), CV_8UC3, cv::Scalar::all(0));
  Rng r(HashSeed(spec.seed, 0x6c6974));  // "lit": a stream of its own
  for (const cv::Rect2d& w : windows) {
    const bool lit = r.Chance(lit_share);
    const double level = r.Uniform(0.45, 1.0), warmth = r.Uniform(0, 1);
    if (!lit) continue;
    // Warm lamplight to a cooler white (a screen, a cold lamp); BGR, the pane inside the frame.
    const cv::Scalar colour(255 * level * (0.45 + 0.5 * warmth),
                            255 * level * (0.75 + 0.2 * warmth), 255 * level);
    const double b = 0.07 * kPpm;
    cv::rectangle(img, cv::Rect2d(w.x + b, w.y + b, w.width - 2 * b, w.height - 2 * b), colour, -1);
  }
  return img;
}

}  // namespace sightfix::demo
