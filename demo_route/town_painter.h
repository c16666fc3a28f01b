// Procedural textures of the demo town: facades (plaster, brick or panels; windows that differ
// one by one; shop fronts, signs in invented glyphs, posters, stains), vehicles, poles, signs,
// tree canopies. Every texture is painted from its own seed, so it comes out the same whichever
// thread paints it and in whatever order. Images are BGR (CV_8UC3), or BGRA (CV_8UC4) where
// parts are transparent; row 0 is the top of the surface, texels per metre as stated.
#pragma once

#include <cstdint>
#include <functional>
#include <memory>
#include <mutex>
#include <opencv2/core.hpp>
#include <vector>

#include "demo_route/town_layout.h"

namespace sightfix::demo {

constexpr double kFacadeTexelsPerM = 56.0;
constexpr double kPlainTexelsPerM = 14.0;
constexpr double kObjectTexelsPerM = 48.0;

// An alphabet of invented glyphs: strokes on a 3x4 lattice, different for every town seed.
class GlyphSet {
 public:
  explicit GlyphSet(uint64_t seed, int count = 40);
  // Draws a random string of n glyphs; top-left at `at`, glyph height h_px.
  void DrawText(cv::Mat& img, cv::Point2d at, double h_px, int n, uint64_t seed,
                const cv::Scalar& colour, int thickness) const;
  int count() const { return static_cast<int>(glyphs_.size()); }

 private:
  std::vector<std::vector<std::vector<cv::Point2d>>> glyphs_;  // glyph -> strokes -> points
};

// A texture with its mip-map pyramid, painted on first use.
struct Texture {
  std::vector<cv::Mat> levels;  // level 0 full size, each next half the size (pyrDown)
  bool has_alpha = false;
  double texels_per_m = 1;
};

class TextureBank {
 public:
  using Painter = std::function<cv::Mat()>;
  // Registers a painter; returns the texture id. Not thread-safe (call while building a scene).
  int Add(Painter painter, double texels_per_m);
  // Paints the texture if not yet painted. Thread-safe.
  const Texture& Get(int id) const;

 private:
  struct Slot {
    Painter painter;
    double texels_per_m;
    mutable std::once_flag once;
    mutable Texture texture;
  };
  std::vector<std::unique_ptr<Slot>> slots_;
};

struct FacadeSpec {
  double width_m = 10, height_m = 10;
  int floors = 3;
  uint64_t seed = 0;
  FacadeVariant variant;  // the look-alikes' departures from the seed's design
};

// The street front of a building (facade_painter.cc): wall material, floors of windows, a
// shop or residential ground floor, posters and weathering. BGR, kFacadeTexelsPerM. Specs equal
// in every field paint equal textures; a default variant paints what the seed alone gives.
// *windows (if given) gets the upper floors' window rectangles, texels.
cv::Mat PaintFacade(const FacadeSpec& spec, const GlyphSet& glyphs,
                    std::vector<cv::Rect2d>* windows = nullptr);
// The light the same street front gives off at night: black but for the panes of its lit
// upper-floor windows, each lit with chance lit_share from a stream of the spec's seed alone, in
// warm to cool white of its own brightness. BGR, the facade's size.
cv::Mat PaintLitWindows(const FacadeSpec& spec, const GlyphSet& glyphs, double lit_share);
cv::Mat PaintPlainWall(double width_m, double height_m, uint64_t seed);
// One face of a vehicle's box, length_m x height_m: 0 and 1 the long sides, 2 the front (white
// lights), 3 the back (red lights), 4 the roof. One body colour per seed on every face.
cv::Mat PaintVehicle(double length_m, double height_m, uint64_t seed, int face,
                     const GlyphSet& glyphs);
cv::Mat PaintMetal(uint64_t seed);
cv::Mat PaintSign(uint64_t seed, const GlyphSet& glyphs);  // BGRA, 0.7 m square
cv::Mat PaintCanopy(uint64_t seed);                        // BGRA, leaves on transparent
cv::Mat PaintBark(uint64_t seed);

}  // namespace sightfix::demo
