#include "client/eval/svg_plot.h"

#include <algorithm>
#include <cmath>
#include <cstdio>

namespace sightfix {
namespace {

// Plot area margins, pixels.
constexpr double kLeft = 62, kRight = 16, kTop = 30, kBottom = 44;

std::string Num(double v) {
  char buf[32];
  std::snprintf(buf, sizeof(buf), "%.1f", v);
  return buf;
}

std::string TickLabel(double v) {
  char buf[32];
  if (v != 0 && (std::fabs(v) < 0.01 || std::fabs(v) >= 1e5))
    std::snprintf(buf, sizeof(buf), "%.0e", v);
  else
    std::snprintf(buf, sizeof(buf), "%g", v);
  return buf;
}

// Tick values: decades (and 2, 5 between when few) on a log axis; 1-2-5 steps on a linear one.
std::vector<double> Ticks(const PlotAxis& a) {
  std::vector<double> t;
  if (a.log) {
    const int k0 = static_cast<int>(std::floor(std::log10(a.lo)));
    const int k1 = static_cast<int>(std::ceil(std::log10(a.hi)));
    const bool dense = k1 - k0 <= 2;
    for (int k = k0; k <= k1; ++k)
      for (double m : dense ? std::vector<double>{1, 2, 5} : std::vector<double>{1}) {
        const double v = m * std::pow(10.0, k);
        if (v >= a.lo * 0.999 && v <= a.hi * 1.001) t.push_back(v);
      }
    return t;
  }
  const double raw = (a.hi - a.lo) / 6, mag = std::pow(10.0, std::floor(std::log10(raw)));
  double step = mag;
  for (double m : {1.0, 2.0, 5.0, 10.0})
    if (m * mag >= raw) {
      step = m * mag;
      break;
    }
  for (double v = std::ceil(a.lo / step) * step; v <= a.hi + 1e-9 * step; v += step)
    t.push_back(std::fabs(v) < 1e-12 * step ? 0 : v);
  return t;
}

double Fraction(const PlotAxis& a, double v) {
  if (a.log) {
    v = std::clamp(v, a.lo, a.hi);
    return (std::log10(v) - std::log10(a.lo)) / (std::log10(a.hi) - std::log10(a.lo));
  }
  return (std::clamp(v, a.lo, a.hi) - a.lo) / (a.hi - a.lo);
}

}  // namespace

std::string EscapeXml(const std::string& text) {
  std::string out;
  for (char c : text) {
    switch (c) {
      case '&':
        out += "&amp;";
        break;
      case '<':
        out += "&lt;";
        break;
      case '>':
        out += "&gt;";
        break;
      case '"':
        out += "&quot;";
        break;
      default:
        out += c;
    }
  }
  return out;
}

SvgPlot::SvgPlot(std::string id, std::string title, PlotAxis x, PlotAxis y, int w, int h)
    : id_(std::move(id)),
      title_(std::move(title)),
      x_(std::move(x)),
      y_(std::move(y)),
      w_(w),
      h_(h) {}

double SvgPlot::X(double v) const { return kLeft + Fraction(x_, v) * (w_ - kLeft - kRight); }
double SvgPlot::Y(double v) const { return h_ - kBottom - Fraction(y_, v) * (h_ - kTop - kBottom); }

void SvgPlot::Line(const std::vector<double>& xs, const std::vector<double>& ys,
                   const std::string& colour, double width, const std::string& dash) {
  std::string pts;
  for (size_t i = 0; i < xs.size() && i < ys.size(); ++i)
    pts += Num(X(xs[i])) + "," + Num(Y(ys[i])) + " ";
  marks_.push_back("<polyline fill=\"none\" stroke=\"" + colour + "\" stroke-width=\"" +
                   Num(width) + "\"" + (dash.empty() ? "" : " stroke-dasharray=\"" + dash + "\"") +
                   " points=\"" + pts + "\"/>");
}

void SvgPlot::Dot(double x, double y, double r, const std::string& fill, const std::string& title) {
  std::string s = "<circle cx=\"" + Num(X(x)) + "\" cy=\"" + Num(Y(y)) + "\" r=\"" + Num(r) +
                  "\" fill=\"" + fill + "\"";
  marks_.push_back(title.empty() ? s + "/>"
                                 : s + "><title>" + EscapeXml(title) + "</title></circle>");
}

void SvgPlot::Ring(double x, double y, double r, const std::string& stroke) {
  marks_.push_back("<circle cx=\"" + Num(X(x)) + "\" cy=\"" + Num(Y(y)) + "\" r=\"" + Num(r) +
                   "\" fill=\"none\" stroke=\"" + stroke + "\" stroke-width=\"1.5\"/>");
}

void SvgPlot::Band(double x0, double x1, const std::string& fill) {
  const double a = X(x0), b = X(x1);
  marks_.push_back("<rect x=\"" + Num(a) + "\" y=\"" + Num(kTop) + "\" width=\"" +
                   Num(std::max(1.0, b - a)) + "\" height=\"" + Num(h_ - kTop - kBottom) +
                   "\" fill=\"" + fill + "\"/>");
}

void SvgPlot::Strip(double x0, double x1, const std::string& fill, const std::string& title) {
  const double a = X(x0), b = X(x1);
  const std::string rect = "<rect x=\"" + Num(a) + "\" y=\"" + Num(kTop) + "\" width=\"" +
                           Num(std::max(1.0, b - a)) + "\" height=\"10\" fill=\"" + fill + "\"";
  marks_.push_back(title.empty() ? rect + "/>"
                                 : rect + "><title>" + EscapeXml(title) + "</title></rect>");
}

void SvgPlot::Bar(double x0, double x1, double y, const std::string& fill) {
  const double a = X(x0), b = X(x1), top = Y(y), base = Y(y_.lo);
  marks_.push_back("<rect x=\"" + Num(a + 0.5) + "\" y=\"" + Num(top) + "\" width=\"" +
                   Num(std::max(0.5, b - a - 1)) + "\" height=\"" + Num(base - top) + "\" fill=\"" +
                   fill + "\"/>");
}

void SvgPlot::VerticalMark(double x, const std::string& label, const std::string& colour, int row) {
  const double px = X(x);
  marks_.push_back("<line x1=\"" + Num(px) + "\" x2=\"" + Num(px) + "\" y1=\"" + Num(kTop) +
                   "\" y2=\"" + Num(h_ - kBottom) + "\" stroke=\"" + colour +
                   "\" stroke-dasharray=\"4 3\"/><text x=\"" + Num(px + 3) + "\" y=\"" +
                   Num(kTop + 12 + 12 * row) + "\" fill=\"" + colour + "\" font-size=\"11\">" +
                   EscapeXml(label) + "</text>");
}

void SvgPlot::HorizontalMark(double y, const std::string& label, const std::string& colour) {
  const double py = Y(y);
  marks_.push_back("<line x1=\"" + Num(kLeft) + "\" x2=\"" + Num(w_ - kRight) + "\" y1=\"" +
                   Num(py) + "\" y2=\"" + Num(py) + "\" stroke=\"" + colour +
                   "\" stroke-dasharray=\"4 3\"/><text x=\"" + Num(w_ - kRight - 4) + "\" y=\"" +
                   Num(py - 4) + "\" fill=\"" + colour +
                   "\" font-size=\"11\" text-anchor=\"end\">" + EscapeXml(label) + "</text>");
}

void SvgPlot::Legend(const std::vector<std::pair<std::string, std::string>>& items) {
  double x = kLeft + 7.5 * title_.size() + 16;  // after the title, on its line
  for (const auto& [colour, label] : items) {
    overlay_.push_back("<circle cx=\"" + Num(x + 5) + "\" cy=\"14\" r=\"4\" fill=\"" + colour +
                       "\"/><text x=\"" + Num(x + 12) + "\" y=\"18\" font-size=\"11\">" +
                       EscapeXml(label) + "</text>");
    x += 18 + 6.2 * label.size();
  }
}

std::string SvgPlot::Render() const {
  std::string s = "<svg class=\"plot\" id=\"" + id_ + "\" width=\"" + std::to_string(w_) +
                  "\" height=\"" + std::to_string(h_) + "\" viewBox=\"0 0 " + std::to_string(w_) +
                  " " + std::to_string(h_) + "\" role=\"img\" aria-label=\"" + EscapeXml(title_) +
                  "\">";
  s += "<defs><clipPath id=\"" + id_ + "-clip\"><rect x=\"" + Num(kLeft) + "\" y=\"" + Num(kTop) +
       "\" width=\"" + Num(w_ - kLeft - kRight) + "\" height=\"" + Num(h_ - kTop - kBottom) +
       "\"/></clipPath></defs>";
  s += "<text x=\"" + Num(kLeft) + "\" y=\"18\" font-size=\"13\" font-weight=\"bold\">" +
       EscapeXml(title_) + "</text>";
  s += "<rect x=\"" + Num(kLeft) + "\" y=\"" + Num(kTop) + "\" width=\"" +
       Num(w_ - kLeft - kRight) + "\" height=\"" + Num(h_ - kTop - kBottom) +
       "\" fill=\"#fbfbf8\" stroke=\"#888\"/>";
  for (double t : Ticks(x_))
    s += "<line x1=\"" + Num(X(t)) + "\" x2=\"" + Num(X(t)) + "\" y1=\"" + Num(kTop) + "\" y2=\"" +
         Num(h_ - kBottom) + "\" stroke=\"#e2e2dc\"/><text x=\"" + Num(X(t)) + "\" y=\"" +
         Num(h_ - kBottom + 14) + "\" font-size=\"10\" text-anchor=\"middle\">" + TickLabel(t) +
         "</text>";
  for (double t : Ticks(y_))
    s += "<line x1=\"" + Num(kLeft) + "\" x2=\"" + Num(w_ - kRight) + "\" y1=\"" + Num(Y(t)) +
         "\" y2=\"" + Num(Y(t)) + "\" stroke=\"#e2e2dc\"/><text x=\"" + Num(kLeft - 4) + "\" y=\"" +
         Num(Y(t) + 3) + "\" font-size=\"10\" text-anchor=\"end\">" + TickLabel(t) + "</text>";
  s += "<text x=\"" + Num((kLeft + w_ - kRight) / 2) + "\" y=\"" + Num(h_ - kBottom + 30) +
       "\" font-size=\"11\" text-anchor=\"middle\">" + EscapeXml(x_.label) + "</text>";
  s += "<text transform=\"translate(14," + Num((kTop + h_ - kBottom) / 2) +
       ") rotate(-90)\" font-size=\"11\" text-anchor=\"middle\">" + EscapeXml(y_.label) + "</text>";
  s += "<g clip-path=\"url(#" + id_ + "-clip)\">";
  for (const std::string& m : marks_) s += m;
  s += "</g>";
  for (const std::string& m : overlay_) s += m;
  return s + "</svg>\n";
}

}  // namespace sightfix
