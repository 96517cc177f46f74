#pragma once
/// \file svg.hpp
/// A small SVG writer for heft's plots: log-log axes with decade ticks, an
/// optional secondary top axis proportional to the bottom one, filled bands,
/// lines and labelled horizontal reference lines.

#include <string>
#include <utility>
#include <vector>

namespace heft {

class LogLogPlot {
 public:
  /// Data ranges (all > 0) and axis labels (with units).
  LogLogPlot(double x_lo, double x_hi, double y_lo, double y_hi, std::string x_label,
             std::string y_label, std::string title);
  /// A secondary top axis showing x * factor, labelled `label`.
  void top_axis(double factor, std::string label);
  /// A filled polygon (band) through the points, in data units.
  void band(const std::vector<std::pair<double, double>>& pts, const std::string& fill,
            double opacity);
  void line(const std::vector<std::pair<double, double>>& pts, const std::string& stroke,
            double width, bool dashed = false);
  /// A horizontal reference line at y with a label at its right end.
  void hline(double y, const std::string& label, const std::string& stroke);
  /// A legend entry (swatch colour, text).
  void legend(const std::string& colour, const std::string& text);
  /// The complete SVG document.
  std::string str() const;

 private:
  double px(double x) const;
  double py(double y) const;
  double x_lo_, x_hi_, y_lo_, y_hi_;
  std::string x_label_, y_label_, title_, top_label_;
  double top_factor_ = 0.0;
  std::string body_;
  std::vector<std::pair<std::string, std::string>> legend_;
};

/// Escapes text for SVG/XML.
std::string xml_escape(const std::string& s);

}  // namespace heft
