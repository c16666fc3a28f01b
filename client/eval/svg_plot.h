// A small SVG plot for self-contained HTML reports: axes (linear or log10) with ticks, labels
// and a grid, and marks placed in data coordinates. No scripts, no external resources.
// Thread-compatible.
#pragma once

#include <string>
#include <vector>

namespace sightfix {

struct PlotAxis {
  double lo = 0, hi = 1;  // REQUIRES: lo < hi; both > 0 when log
  bool log = false;
  std::string label;
};

class SvgPlot {
 public:
  SvgPlot(std::string id, std::string title, PlotAxis x, PlotAxis y, int width_px = 560,
          int height_px = 320);
  // Data coordinates to pixels (values outside the axes are clamped to its ends).
  double X(double v) const;
  double Y(double v) const;
  // Marks; colours are CSS colours, text is escaped.
  void Line(const std::vector<double>& xs, const std::vector<double>& ys, const std::string& colour,
            double width = 1.5, const std::string& dash = "");
  void Dot(double x, double y, double r, const std::string& fill, const std::string& title = "");
  void Ring(double x, double y, double r, const std::string& stroke);
  void Band(double x0, double x1, const std::string& fill);  // a vertical band over the y range
  // A band 10 px tall along the top of the plot area from x0 to x1, with a hover title.
  void Strip(double x0, double x1, const std::string& fill, const std::string& title = "");
  void Bar(double x0, double x1, double y, const std::string& fill);
  // row: label line from the top (0, 1, ...), so close marks do not print over each other.
  void VerticalMark(double x, const std::string& label, const std::string& colour, int row = 0);
  void HorizontalMark(double y, const std::string& label, const std::string& colour);
  void Legend(const std::vector<std::pair<std::string, std::string>>& colour_and_label);
  std::string Render() const;

 private:
  std::string id_, title_;
  PlotAxis x_, y_;
  int w_, h_;
  std::vector<std::string> marks_;    // drawn in order inside the clip
  std::vector<std::string> overlay_;  // legend, outside the clip
};

// Escapes &, <, >, " for HTML and SVG text.
std::string EscapeXml(const std::string& text);

}  // namespace sightfix
