#include "heft/svg.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>

namespace heft {
namespace {
constexpr double kW = 760, kH = 540, kLeft = 90, kRight = 30, kTop = 80, kBottom = 70;

std::string num(double v) {
  char b[32];
  std::snprintf(b, sizeof b, "%.2f", v);
  return b;
}

std::string tick_label(double v) {
  char b[32];
  if (v >= 1 && v < 1e5) std::snprintf(b, sizeof b, "%.0f", v);
  else if (v >= 1e-3 && v < 1) std::snprintf(b, sizeof b, "%g", v);
  else std::snprintf(b, sizeof b, "1e%d", static_cast<int>(std::lround(std::log10(v))));
  return b;
}
}  // namespace

std::string xml_escape(const std::string& s) {
  std::string o;
  for (char c : s) {
    switch (c) {
      case '&': o += "&amp;"; break;
      case '<': o += "&lt;"; break;
      case '>': o += "&gt;"; break;
      case '"': o += "&quot;"; break;
      default: o += c;
    }
  }
  return o;
}

LogLogPlot::LogLogPlot(double x_lo, double x_hi, double y_lo, double y_hi, std::string x_label,
                       std::string y_label, std::string title)
    : x_lo_(x_lo), x_hi_(x_hi), y_lo_(y_lo), y_hi_(y_hi), x_label_(std::move(x_label)),
      y_label_(std::move(y_label)), title_(std::move(title)) {}

void LogLogPlot::top_axis(double factor, std::string label) {
  top_factor_ = factor;
  top_label_ = std::move(label);
}

double LogLogPlot::px(double x) const {
  return kLeft + (kW - kLeft - kRight) * std::log(x / x_lo_) / std::log(x_hi_ / x_lo_);
}
double LogLogPlot::py(double y) const {
  return kH - kBottom - (kH - kTop - kBottom) * std::log(y / y_lo_) / std::log(y_hi_ / y_lo_);
}

void LogLogPlot::band(const std::vector<std::pair<double, double>>& pts, const std::string& fill,
                      double opacity) {
  if (pts.size() < 3) return;
  body_ += "<polygon clip-path=\"url(#" + ids_ + "frame)\" fill=\"" + fill + "\" fill-opacity=\"" + num(opacity) +
           "\" stroke=\"none\" points=\"";
  for (const auto& [x, y] : pts) body_ += num(px(x)) + "," + num(py(y)) + " ";
  body_ += "\"/>\n";
}

void LogLogPlot::line(const std::vector<std::pair<double, double>>& pts, const std::string& stroke,
                      double width, bool dashed) {
  if (pts.size() < 2) return;
  body_ += "<polyline clip-path=\"url(#" + ids_ + "frame)\" fill=\"none\" stroke=\"" + stroke +
           "\" stroke-width=\"" + num(width) + "\"" +
           (dashed ? " stroke-dasharray=\"6,4\"" : "") + " points=\"";
  for (const auto& [x, y] : pts) body_ += num(px(x)) + "," + num(py(y)) + " ";
  body_ += "\"/>\n";
}

void LogLogPlot::hline(double y, const std::string& label, const std::string& stroke) {
  if (y <= y_lo_ || y >= y_hi_) return;
  body_ += "<line x1=\"" + num(kLeft) + "\" x2=\"" + num(kW - kRight) + "\" y1=\"" + num(py(y)) +
           "\" y2=\"" + num(py(y)) + "\" stroke=\"" + stroke +
           "\" stroke-width=\"1.2\" stroke-dasharray=\"2,3\"/>\n";
  body_ += "<text x=\"" + num(kW - kRight - 4) + "\" y=\"" + num(py(y) - 4) +
           "\" font-size=\"12\" text-anchor=\"end\" fill=\"" + stroke + "\">" + xml_escape(label) +
           "</text>\n";
}

void LogLogPlot::vline(double x, const std::string& label, const std::string& stroke) {
  if (x <= x_lo_ || x >= x_hi_) return;
  body_ += "<line x1=\"" + num(px(x)) + "\" x2=\"" + num(px(x)) + "\" y1=\"" + num(kTop) + "\" y2=\"" +
           num(kH - kBottom) + "\" stroke=\"" + stroke + "\" stroke-width=\"1.2\" stroke-dasharray=\"6,3\"/>\n";
  body_ += "<text transform=\"translate(" + num(px(x) - 4) + "," + num(kTop + 6) +
           ") rotate(-90)\" font-size=\"12\" text-anchor=\"end\" fill=\"" + stroke + "\">" + xml_escape(label) +
           "</text>\n";
}

void LogLogPlot::bars(const std::vector<std::pair<double, double>>& fraction, const std::string& fill) {
  const double strip = (kH - kTop - kBottom) / 6.0, half_w = 2.5;
  for (const auto& [x, f] : fraction) {
    if (x <= x_lo_ || x >= x_hi_ || !(f > 0)) continue;
    const double h = strip * std::min(f, 1.0);
    body_ += "<rect x=\"" + num(px(x) - half_w) + "\" y=\"" + num(kH - kBottom - h) + "\" width=\"" +
             num(2 * half_w) + "\" height=\"" + num(h) + "\" fill=\"" + fill + "\" fill-opacity=\"0.8\"/>\n";
  }
}

void LogLogPlot::marker(double x, double y, const std::string& label, const std::string& stroke) {
  if (x <= x_lo_ || x >= x_hi_ || y <= y_lo_ || y >= y_hi_) return;
  body_ += "<circle cx=\"" + num(px(x)) + "\" cy=\"" + num(py(y)) + "\" r=\"6\" fill=\"none\" stroke=\"" +
           stroke + "\" stroke-width=\"2.5\"/>\n";
  body_ += "<text x=\"" + num(px(x) + 9) + "\" y=\"" + num(py(y) + 4) + "\" font-size=\"12\" fill=\"" + stroke +
           "\">" + xml_escape(label) + "</text>\n";
}

void LogLogPlot::legend(const std::string& colour, const std::string& text) {
  legend_.emplace_back(colour, text);
}

std::string LogLogPlot::str() const {
  std::string s = "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n";
  s += "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" + num(kW) + "\" height=\"" + num(kH) +
       "\" viewBox=\"0 0 " + num(kW) + " " + num(kH) + "\" font-family=\"DejaVu Sans, sans-serif\">\n";
  s += "<rect width=\"100%\" height=\"100%\" fill=\"white\"/>\n";
  s += "<defs><clipPath id=\"" + ids_ + "frame\"><rect x=\"" + num(kLeft) + "\" y=\"" + num(kTop) + "\" width=\"" +
       num(kW - kLeft - kRight) + "\" height=\"" + num(kH - kTop - kBottom) + "\"/></clipPath></defs>\n";
  // Decade grid and ticks.
  for (int e = static_cast<int>(std::floor(std::log10(x_lo_))); e <= std::ceil(std::log10(x_hi_)); ++e) {
    const double v = std::pow(10.0, e);
    if (v < x_lo_ * 0.999 || v > x_hi_ * 1.001) continue;
    s += "<line x1=\"" + num(px(v)) + "\" x2=\"" + num(px(v)) + "\" y1=\"" + num(kTop) + "\" y2=\"" +
         num(kH - kBottom) + "\" stroke=\"#dddddd\"/>\n";
    s += "<text x=\"" + num(px(v)) + "\" y=\"" + num(kH - kBottom + 18) +
         "\" font-size=\"13\" text-anchor=\"middle\">" + tick_label(v) + "</text>\n";
  }
  for (int e = static_cast<int>(std::floor(std::log10(y_lo_))); e <= std::ceil(std::log10(y_hi_)); ++e) {
    const double v = std::pow(10.0, e);
    if (v < y_lo_ * 0.999 || v > y_hi_ * 1.001) continue;
    s += "<line x1=\"" + num(kLeft) + "\" x2=\"" + num(kW - kRight) + "\" y1=\"" + num(py(v)) +
         "\" y2=\"" + num(py(v)) + "\" stroke=\"#dddddd\"/>\n";
    s += "<text x=\"" + num(kLeft - 8) + "\" y=\"" + num(py(v) + 4) +
         "\" font-size=\"13\" text-anchor=\"end\">" + tick_label(v) + "</text>\n";
  }
  if (top_factor_ > 0) {
    const double lo = x_lo_ * top_factor_, hi = x_hi_ * top_factor_;
    for (int e = static_cast<int>(std::floor(std::log10(lo))); e <= std::ceil(std::log10(hi)); ++e) {
      const double v = std::pow(10.0, e);
      if (v < lo * 0.999 || v > hi * 1.001) continue;
      const double x = px(v / top_factor_);
      s += "<line x1=\"" + num(x) + "\" x2=\"" + num(x) + "\" y1=\"" + num(kTop) + "\" y2=\"" +
           num(kTop - 6) + "\" stroke=\"black\"/>\n";
      s += "<text x=\"" + num(x) + "\" y=\"" + num(kTop - 10) +
           "\" font-size=\"13\" text-anchor=\"middle\">" + tick_label(v) + "</text>\n";
    }
    s += "<text x=\"" + num((kLeft + kW - kRight) / 2) + "\" y=\"" + num(kTop - 30) +
         "\" font-size=\"14\" text-anchor=\"middle\">" + xml_escape(top_label_) + "</text>\n";
  }
  s += body_;
  s += "<rect x=\"" + num(kLeft) + "\" y=\"" + num(kTop) + "\" width=\"" + num(kW - kLeft - kRight) +
       "\" height=\"" + num(kH - kTop - kBottom) + "\" fill=\"none\" stroke=\"black\"/>\n";
  s += "<text x=\"" + num((kLeft + kW - kRight) / 2) + "\" y=\"" + num(kH - 25) +
       "\" font-size=\"15\" text-anchor=\"middle\">" + xml_escape(x_label_) + "</text>\n";
  s += "<text transform=\"translate(28," + num((kTop + kH - kBottom) / 2) +
       ") rotate(-90)\" font-size=\"15\" text-anchor=\"middle\">" + xml_escape(y_label_) + "</text>\n";
  s += "<text x=\"" + num(kLeft) + "\" y=\"22\" font-size=\"15\" font-weight=\"bold\">" +
       xml_escape(title_) + "</text>\n";
  double ly = kTop + 18;
  for (const auto& [c, t] : legend_) {
    s += "<rect x=\"" + num(kLeft + 12) + "\" y=\"" + num(ly - 10) + "\" width=\"18\" height=\"10\" fill=\"" +
         c + "\"/>\n<text x=\"" + num(kLeft + 36) + "\" y=\"" + num(ly) + "\" font-size=\"12\">" +
         xml_escape(t) + "</text>\n";
    ly += 16;
  }
  s += "</svg>\n";
  return s;
}

namespace {
constexpr double kMapSize = 560, kMapLeft = 80, kMapTop = 60;
}  // namespace

SkyMap::SkyMap(double half_mas, std::string title) : half_(half_mas), title_(std::move(title)) {}

double SkyMap::px(double east_mas) const { return kMapLeft + kMapSize * (half_ - east_mas) / (2 * half_); }
double SkyMap::py(double north_mas) const { return kMapTop + kMapSize * (half_ - north_mas) / (2 * half_); }

void SkyMap::image(const std::vector<double>& density, int n) {
  double peak = 0.0;
  for (double v : density) peak = std::max(peak, v);
  if (!(peak > 0)) return;
  peak_ = peak;
  const double cell = 2 * half_ / n;
  for (int j = 0; j < n; ++j)
    for (int i = 0; i < n; ++i) {
      const double v = density[static_cast<std::size_t>(j) * n + i] / peak;
      if (!(v > 0.002)) continue;
      // White (255,255,255) to dark blue (8,48,107).
      auto ch = [v](double hi, double lo) { return static_cast<int>(std::lround(hi + (lo - hi) * v)); };
      char col[16];
      std::snprintf(col, sizeof col, "#%02x%02x%02x", ch(255, 8), ch(255, 48), ch(255, 107));
      const double east_hi = -half_ + (i + 1) * cell, north_hi = -half_ + (j + 1) * cell;
      body_ += "<rect x=\"" + num(px(east_hi)) + "\" y=\"" + num(py(north_hi)) + "\" width=\"" +
               num(kMapSize / n + 0.3) + "\" height=\"" + num(kMapSize / n + 0.3) + "\" fill=\"" + col + "\"/>\n";
    }
}

void SkyMap::credible_contours(const std::vector<double>& raw, int n) {
  const double cell = 2 * half_ / n;
  // A histogram of finitely many draws is speckled: smooth it with a
  // separable Gaussian of Scott's rule width, sigma_data N^(-1/6) in two
  // dimensions (Scott 1992, Multivariate Density Estimation, Sect. 6.3), with
  // the map's own spread and N its occupied cells (at most the draws), at
  // least one cell.
  double m0 = 0, mi = 0, mj = 0, mii = 0, mjj = 0, occupied = 0;
  for (int j = 0; j < n; ++j)
    for (int i = 0; i < n; ++i) {
      const double v = raw[static_cast<std::size_t>(j) * n + i];
      if (!(v > 0)) continue;
      ++occupied;
      m0 += v;
      mi += v * i;
      mj += v * j;
      mii += v * i * i;
      mjj += v * j * j;
    }
  if (!(m0 > 0)) return;
  const double var = 0.5 * (mii / m0 - (mi / m0) * (mi / m0) + mjj / m0 - (mj / m0) * (mj / m0));
  const double sigma = std::max(1.0, std::sqrt(std::max(var, 0.0)) * std::pow(occupied, -1.0 / 6.0));
  const int reach = static_cast<int>(std::ceil(3 * sigma));
  std::vector<double> kernel(2 * reach + 1);
  for (int d = -reach; d <= reach; ++d) kernel[d + reach] = std::exp(-0.5 * d * d / (sigma * sigma));
  std::vector<double> tmp(raw.size(), 0.0), density(raw.size(), 0.0);
  for (int pass = 0; pass < 2; ++pass) {  // along i, then along j
    const std::vector<double>& in = pass == 0 ? raw : tmp;
    std::vector<double>& out = pass == 0 ? tmp : density;
    for (int j = 0; j < n; ++j)
      for (int i = 0; i < n; ++i) {
        double acc = 0.0;
        for (int d = -reach; d <= reach; ++d) {
          const int ii = pass == 0 ? i + d : i, jj = pass == 0 ? j : j + d;
          if (ii >= 0 && ii < n && jj >= 0 && jj < n) acc += kernel[d + reach] * in[static_cast<std::size_t>(jj) * n + ii];
        }
        out[static_cast<std::size_t>(j) * n + i] = acc;
      }
  }
  // Levels: the density above which the cells hold 68 % and 95 % of the map's mass.
  std::vector<double> sorted(density);
  std::sort(sorted.rbegin(), sorted.rend());
  double total = 0.0;
  for (double v : sorted) total += v;
  if (!(total > 0)) return;
  auto level_for = [&](double p) {
    double acc = 0.0;
    for (double v : sorted)
      if ((acc += v) >= p * total) return v;
    return sorted.back();
  };
  const std::pair<double, const char*> levels[2] = {{0.68, "#cb181d"}, {0.95, "#fb6a4a"}};
  for (const auto& [p, stroke] : levels) {
    const double t = level_for(p);
    std::string path;
    auto at = [&](int i, int j) { return density[static_cast<std::size_t>(j) * n + i]; };
    // Cell centres (i, j) -> sky offsets; the crossing on an edge by linear interpolation.
    auto east = [&](double i) { return -half_ + (i + 0.5) * cell; };
    auto north = [&](double j) { return -half_ + (j + 0.5) * cell; };
    for (int j = 0; j + 1 < n; ++j)
      for (int i = 0; i + 1 < n; ++i) {
        const double v[4] = {at(i, j), at(i + 1, j), at(i + 1, j + 1), at(i, j + 1)};  // counter-clockwise
        const double ci[4] = {0, 1, 1, 0}, cj[4] = {0, 0, 1, 1};
        std::vector<std::pair<double, double>> cross;
        for (int e = 0; e < 4; ++e) {
          const int f = (e + 1) % 4;
          if ((v[e] >= t) == (v[f] >= t)) continue;
          const double u = (t - v[e]) / (v[f] - v[e]);
          cross.emplace_back(east(i + ci[e] + u * (ci[f] - ci[e])), north(j + cj[e] + u * (cj[f] - cj[e])));
        }
        // Two crossings: one segment; four (a saddle): two, pairing neighbours.
        for (std::size_t k = 0; k + 1 < cross.size(); k += 2)
          path += "M" + num(px(cross[k].first)) + " " + num(py(cross[k].second)) + " L" + num(px(cross[k + 1].first)) +
                  " " + num(py(cross[k + 1].second)) + " ";
      }
    if (path.empty()) continue;
    body_ += "<path d=\"" + path + "\" fill=\"none\" stroke=\"" + stroke + "\" stroke-width=\"1.6\"/>\n";
    contours_.emplace_back(stroke, p < 0.9 ? "68 % credible region" : "95 % credible region");
  }
}

void SkyMap::circle(double r_mas, const std::string& label, const std::string& stroke, bool dashed) {
  if (!(r_mas > 0 && r_mas < 1.5 * half_)) return;
  body_ += "<circle clip-path=\"url(#" + ids_ + "map)\" cx=\"" + num(px(0)) + "\" cy=\"" + num(py(0)) + "\" r=\"" +
           num(kMapSize * r_mas / (2 * half_)) + "\" fill=\"none\" stroke=\"" + stroke + "\" stroke-width=\"1.5\"" +
           (dashed ? " stroke-dasharray=\"6,4\"" : "") + "/>\n";
  body_ += "<text x=\"" + num(px(0) + 4) + "\" y=\"" + num(py(r_mas) - 4) + "\" font-size=\"12\" fill=\"" + stroke +
           "\">" + xml_escape(label) + "</text>\n";
}

std::string SkyMap::str() const {
  const double w = kMapLeft + kMapSize + 100, h = kMapTop + kMapSize + 60;
  std::string s = "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n";
  s += "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" + num(w) + "\" height=\"" + num(h) + "\" viewBox=\"0 0 " +
       num(w) + " " + num(h) + "\" font-family=\"DejaVu Sans, sans-serif\">\n";
  s += "<rect width=\"100%\" height=\"100%\" fill=\"white\"/>\n";
  s += "<defs><clipPath id=\"" + ids_ + "map\"><rect x=\"" + num(kMapLeft) + "\" y=\"" + num(kMapTop) + "\" width=\"" +
       num(kMapSize) + "\" height=\"" + num(kMapSize) + "\"/></clipPath></defs>\n";
  s += "<g clip-path=\"url(#" + ids_ + "map)\">\n" + body_ + "</g>\n";
  // Ticks: a round step giving about five intervals per half.
  const double raw = half_ / 4, mag = std::pow(10.0, std::floor(std::log10(raw)));
  const double step = raw / mag < 2 ? 2 * mag : (raw / mag < 5 ? 5 * mag : 10 * mag);
  for (double v = -std::floor(half_ / step) * step; v <= half_ + 1e-9; v += step) {
    char b[32];
    std::snprintf(b, sizeof b, "%g", std::abs(v) < 1e-9 ? 0.0 : v);
    s += "<line x1=\"" + num(px(v)) + "\" x2=\"" + num(px(v)) + "\" y1=\"" + num(kMapTop + kMapSize) + "\" y2=\"" +
         num(kMapTop + kMapSize + 6) + "\" stroke=\"black\"/>\n";
    s += "<text x=\"" + num(px(v)) + "\" y=\"" + num(kMapTop + kMapSize + 20) + "\" font-size=\"12\" text-anchor=\"middle\">" +
         b + "</text>\n";
    s += "<line x1=\"" + num(kMapLeft - 6) + "\" x2=\"" + num(kMapLeft) + "\" y1=\"" + num(py(v)) + "\" y2=\"" +
         num(py(v)) + "\" stroke=\"black\"/>\n";
    s += "<text x=\"" + num(kMapLeft - 9) + "\" y=\"" + num(py(v) + 4) + "\" font-size=\"12\" text-anchor=\"end\">" + b +
         "</text>\n";
  }
  s += "<rect x=\"" + num(kMapLeft) + "\" y=\"" + num(kMapTop) + "\" width=\"" + num(kMapSize) + "\" height=\"" +
       num(kMapSize) + "\" fill=\"none\" stroke=\"black\"/>\n";
  // The star, and a compass: north up, east left.
  s += "<path d=\"M" + num(px(0)) + " " + num(py(0) - 7) + " L" + num(px(0) + 2) + " " + num(py(0) - 2) + " L" +
       num(px(0) + 7) + " " + num(py(0)) + " L" + num(px(0) + 2) + " " + num(py(0) + 2) + " L" + num(px(0)) + " " +
       num(py(0) + 7) + " L" + num(px(0) - 2) + " " + num(py(0) + 2) + " L" + num(px(0) - 7) + " " + num(py(0)) +
       " L" + num(px(0) - 2) + " " + num(py(0) - 2) + " Z\" fill=\"#e6550d\"/>\n";
  const double cx = kMapLeft + kMapSize - 30, cy = kMapTop + 50;
  s += "<line x1=\"" + num(cx) + "\" y1=\"" + num(cy) + "\" x2=\"" + num(cx) + "\" y2=\"" + num(cy - 30) +
       "\" stroke=\"black\" stroke-width=\"1.5\"/><text x=\"" + num(cx) + "\" y=\"" + num(cy - 34) +
       "\" font-size=\"13\" text-anchor=\"middle\">N</text>\n";
  s += "<line x1=\"" + num(cx) + "\" y1=\"" + num(cy) + "\" x2=\"" + num(cx - 30) + "\" y2=\"" + num(cy) +
       "\" stroke=\"black\" stroke-width=\"1.5\"/><text x=\"" + num(cx - 36) + "\" y=\"" + num(cy + 4) +
       "\" font-size=\"13\" text-anchor=\"end\">E</text>\n";
  s += "<text x=\"" + num(kMapLeft + kMapSize / 2) + "\" y=\"" + num(kMapTop + kMapSize + 44) +
       "\" font-size=\"14\" text-anchor=\"middle\">offset east, &#916;&#945;* (mas; east to the left)</text>\n";
  s += "<text transform=\"translate(" + num(kMapLeft - 52) + "," + num(kMapTop + kMapSize / 2) +
       ") rotate(-90)\" font-size=\"14\" text-anchor=\"middle\">offset north, &#916;&#948; (mas)</text>\n";
  s += "<text x=\"" + num(kMapLeft + kMapSize / 2) + "\" y=\"" + num(kMapTop - 22) +
       "\" font-size=\"15\" text-anchor=\"middle\">" + xml_escape(title_) + "</text>\n";
  // Colour bar of the density image, white (0) to dark blue (the peak).
  if (peak_ > 0) {
    const double bx = kMapLeft + kMapSize + 20, bw = 16;
    s += "<defs><linearGradient id=\"" + ids_ + "bar\" x1=\"0\" y1=\"1\" x2=\"0\" y2=\"0\"><stop offset=\"0\" "
         "stop-color=\"#ffffff\"/><stop offset=\"1\" stop-color=\"#08306b\"/></linearGradient></defs>\n";
    s += "<rect x=\"" + num(bx) + "\" y=\"" + num(kMapTop) + "\" width=\"" + num(bw) + "\" height=\"" + num(kMapSize) +
         "\" fill=\"url(#" + ids_ + "bar)\" stroke=\"black\"/>\n";
    char b[32];
    std::snprintf(b, sizeof b, "%.3g", peak_);
    s += "<text x=\"" + num(bx + bw + 4) + "\" y=\"" + num(kMapTop + 10) + "\" font-size=\"12\">" + b + "</text>\n";
    s += "<text x=\"" + num(bx + bw + 4) + "\" y=\"" + num(kMapTop + kMapSize) + "\" font-size=\"12\">0</text>\n";
    s += "<text transform=\"translate(" + num(bx + bw + 30) + "," + num(kMapTop + kMapSize / 2) +
         ") rotate(-90)\" font-size=\"13\" text-anchor=\"middle\">posterior density (per mas&#178;)</text>\n";
  }
  // Legend of the credible contours, under the title.
  double lx = kMapLeft + 8;
  for (const auto& [colour, text] : contours_) {
    s += "<line x1=\"" + num(lx) + "\" x2=\"" + num(lx + 20) + "\" y1=\"" + num(kMapTop + 14) + "\" y2=\"" +
         num(kMapTop + 14) + "\" stroke=\"" + colour + "\" stroke-width=\"2\"/><text x=\"" + num(lx + 24) + "\" y=\"" +
         num(kMapTop + 18) + "\" font-size=\"12\">" + xml_escape(text) + "</text>\n";
    lx += 190;
  }
  s += "</svg>\n";
  return s;
}

}  // namespace heft
