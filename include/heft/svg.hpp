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
  /// A vertical reference line at x with a label at its top end.
  void vline(double x, const std::string& label, const std::string& stroke);
  /// Bars standing on the bottom axis at x with heights `fraction` (0-1) of
  /// a strip of the plot's lower sixth: a panel-less secondary quantity.
  void bars(const std::vector<std::pair<double, double>>& fraction, const std::string& fill);
  /// A marker (a ring) at (x, y) with a label beside it.
  void marker(double x, double y, const std::string& label, const std::string& stroke);
  /// A legend entry (swatch colour, text).
  void legend(const std::string& colour, const std::string& text);
  /// Prefix of the document's internal ids (clip paths), so that several
  /// figures can sit inline in one HTML page; set before drawing.
  void id_prefix(std::string prefix) { ids_ = std::move(prefix); }
  /// The complete SVG document.
  std::string str() const;

 private:
  double px(double x) const;
  double py(double y) const;
  std::string ids_;
  double x_lo_, x_hi_, y_lo_, y_hi_;
  std::string x_label_, y_label_, title_, top_label_;
  double top_factor_ = 0.0;
  std::string body_;
  std::vector<std::pair<std::string, std::string>> legend_;
};

/// A square sky map centred on the star: east to the left, north up (as on
/// the sky), linear offsets in mas, a density image, circles and a compass.
class SkyMap {
 public:
  SkyMap(double half_mas, std::string title);
  /// A density image on n x n cells over the map (index j * n + i, i
  /// eastwards, j northwards, as SkyPrediction::density), shaded linearly
  /// from white to dark blue up to its maximum.
  void image(const std::vector<double>& density, int n);
  /// The 68 % and 95 % highest-density credible regions of the same map as
  /// contour lines: the map smoothed with a Gaussian of Scott's rule width
  /// (at least one cell), levels from its cells sorted by density, marching
  /// squares between cell centres; with a legend.
  void credible_contours(const std::vector<double>& density, int n);
  /// A circle of radius r_mas around the star, labelled.
  void circle(double r_mas, const std::string& label, const std::string& stroke, bool dashed);
  /// As LogLogPlot::id_prefix.
  void id_prefix(std::string prefix) { ids_ = std::move(prefix); }
  std::string str() const;

 private:
  std::string ids_;
  double px(double east_mas) const;
  double py(double north_mas) const;
  double half_;
  double peak_ = 0.0;  ///< the image's maximum density (per mas^2), for its colour bar
  std::string title_, body_;
  std::vector<std::pair<std::string, std::string>> contours_;  ///< legend: colour, text
};

/// Escapes text for SVG/XML.
std::string xml_escape(const std::string& s);

}  // namespace heft
