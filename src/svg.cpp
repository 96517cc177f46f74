#include "heft/svg.hpp"

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
  body_ += "<polygon clip-path=\"url(#frame)\" fill=\"" + fill + "\" fill-opacity=\"" + num(opacity) +
           "\" stroke=\"none\" points=\"";
  for (const auto& [x, y] : pts) body_ += num(px(x)) + "," + num(py(y)) + " ";
  body_ += "\"/>\n";
}

void LogLogPlot::line(const std::vector<std::pair<double, double>>& pts, const std::string& stroke,
                      double width, bool dashed) {
  if (pts.size() < 2) return;
  body_ += "<polyline clip-path=\"url(#frame)\" fill=\"none\" stroke=\"" + stroke +
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

void LogLogPlot::legend(const std::string& colour, const std::string& text) {
  legend_.emplace_back(colour, text);
}

std::string LogLogPlot::str() const {
  std::string s = "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n";
  s += "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" + num(kW) + "\" height=\"" + num(kH) +
       "\" viewBox=\"0 0 " + num(kW) + " " + num(kH) + "\" font-family=\"DejaVu Sans, sans-serif\">\n";
  s += "<rect width=\"100%\" height=\"100%\" fill=\"white\"/>\n";
  s += "<defs><clipPath id=\"frame\"><rect x=\"" + num(kLeft) + "\" y=\"" + num(kTop) + "\" width=\"" +
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

}  // namespace heft
