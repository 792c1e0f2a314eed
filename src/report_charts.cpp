// report.html's SVG drawing: axes and shapes, the selection funnel, the filter histograms, the
// ranking bars, the scree plot and the samples on two components.
#include <algorithm>  // std::clamp, std::max, std::min, std::sort
#include <cmath>      // std::log10, std::pow, std::floor, std::ceil, std::isnan, std::isinf
#include <map>        // std::map

#include "internal/report_html.h"

namespace pare {

namespace internal::html {

// ---- axes
// ------------------------------------------------------------------------------------------

// A step of 1, 2 or 5 times a power of ten near range / target.
double nice_step(double range, int target) {
  if (!(range > 0)) return 1;
  const double raw = range / target;
  const double mag = std::pow(10.0, std::floor(std::log10(raw)));
  const double f = raw / mag;
  return (f < 1.5 ? 1 : f < 3.5 ? 2 : f < 7.5 ? 5 : 10) * mag;
}

std::vector<double> linear_ticks(double lo, double hi, int target, bool integers) {
  double step = nice_step(hi - lo, target);
  if (integers) step = std::max(1.0, std::round(step));
  std::vector<double> ticks;
  for (double k = std::ceil(lo / step - 1e-9); k * step <= hi + step * 1e-9; k += 1)
    ticks.push_back(k == 0 ? 0.0 : k * step);  // never "-0"
  return ticks;
}

double Scale::operator()(double v) const {
  const double t = log ? std::log10(v) : v;
  return r0 + (t - d0) / (d1 - d0) * (r1 - r0);
}

void line(std::string& s, double x1, double y1, double x2, double y2, const char* stroke,
          double width, const char* dash) {
  s += "<line x1=\"" + xy(x1) + "\" y1=\"" + xy(y1) + "\" x2=\"" + xy(x2) + "\" y2=\"" + xy(y2) +
       "\" stroke=\"" + stroke + "\" stroke-width=\"" + xy(width) + "\"";
  if (dash) s += std::string(" stroke-dasharray=\"") + dash + "\"";
  s += "/>";
}

void text(std::string& s, double x, double y, const std::string& escaped, const char* anchor,
          const char* cls, const char* extra) {
  s += "<text x=\"" + xy(x) + "\" y=\"" + xy(y) + "\"";
  if (std::string_view(anchor) != "start") s += std::string(" text-anchor=\"") + anchor + "\"";
  if (cls) s += std::string(" class=\"") + cls + "\"";
  if (extra) s += std::string(" ") + extra;
  s += ">" + escaped + "</text>";
}

void rect(std::string& s, double x, double y, double w, double h, const char* fill,
          const std::string& title) {
  s += "<rect x=\"" + xy(x) + "\" y=\"" + xy(y) + "\" width=\"" + xy(std::max(w, 0.0)) +
       "\" height=\"" + xy(std::max(h, 0.0)) + "\" fill=\"" + fill + "\"";
  if (title.empty()) {
    s += "/>";
  } else {
    s += "><title>" + title + "</title></rect>";
  }
}

std::string svg_open(double width, double height, const std::string& label) {
  return "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 " + xy(width) + " " + xy(height) +
         "\" width=\"" + xy(width) + "\" height=\"" + xy(height) + "\" role=\"img\" aria-label=\"" +
         esc(label) + "\">";
}

// A horizontal value axis along y = `y` from the scale's r0 to r1, with ticks and a label.
void x_axis(std::string& s, const Scale& x, double y, const std::vector<double>& ticks,
            const std::vector<std::string>& labels, const std::string& label, double label_y) {
  line(s, x.r0, y, x.r1, y, kAxis);
  for (std::size_t k = 0; k < ticks.size(); ++k) {
    const double px = x.raw(ticks[k]);
    line(s, px, y, px, y + 4, kAxis);
    text(s, px, y + 16, labels[k], "middle", "tick");
  }
  text(s, (x.r0 + x.r1) / 2, label_y, esc(label), "middle", "label");
}

// Ticks of a log10 count axis from 1 to 10^top: "1", "10", "100", "1,000", ...
void log_count_axis(std::string& s, const Scale& y, double x, int top, double grid_to,
                    const std::string& label, double mid_y) {
  line(s, x, y.r0, x, y.r1, kAxis);
  for (int e = 0; e <= top; ++e) {
    const double py = y.raw(e);
    line(s, x - 4, py, x, py, kAxis);
    line(s, x, py, grid_to, py, "#eeeeee");
    text(s, x - 7, py + 4, count(static_cast<std::int64_t>(std::llround(std::pow(10.0, e)))), "end",
         "tick");
  }
  s += "<text class=\"label\" text-anchor=\"middle\" transform=\"translate(14 " + xy(mid_y) +
       ") rotate(-90)\">" + esc(label) + "</text>";
}

// ---- charts
// -----------------------------------------------------------------------------------------

std::string funnel_svg(const std::vector<ReportStep>& steps) {
  const double width = 760, left = 96, right = 250, top = 8, row = 26, bottom = 46;
  const double height = top + row * static_cast<double>(steps.size()) + bottom;
  std::int64_t most = 1;
  for (const auto& st : steps) most = std::max({most, st.in, st.out});
  const std::vector<double> ticks = linear_ticks(0, static_cast<double>(most), 5);
  const double domain_hi = std::max(static_cast<double>(most), ticks.back());
  const Scale x{0, domain_hi, left, width - right};
  std::string s = svg_open(width, height, "Selection funnel: features in and out of every step");
  for (const double t : ticks)
    line(s, x.raw(t), top, x.raw(t), top + row * static_cast<double>(steps.size()), "#eeeeee");
  for (std::size_t k = 0; k < steps.size(); ++k) {
    const ReportStep& st = steps[k];
    const double y = top + row * static_cast<double>(k);
    const std::int64_t removed = st.in - st.out;
    s += "<g class=\"step\" data-step=\"" + esc(st.name) + "\" data-in=\"" + std::to_string(st.in) +
         "\" data-out=\"" + std::to_string(st.out) + "\">";
    s += "<title>" + esc(st.name) + ": " + count(st.in) + " in, " + count(st.out) + " out" +
         (removed > 0 ? ", " + count(removed) + " removed" : std::string()) + " (" +
         g(st.seconds, 2) + " s)</title>";
    text(s, left - 8, y + row / 2 + 4, esc(st.name), "end");
    rect(s, x(0), y + 5, x(static_cast<double>(st.in)) - x(0), row - 10, kPale);
    rect(s, x(0), y + 5, x(static_cast<double>(st.out)) - x(0), row - 10, kBlue);
    std::string label = "<tspan class=\"num\">" + count(st.in) +
                        "</tspan> \xE2\x86\x92 <tspan class=\"num\">" + count(st.out) + "</tspan>";
    if (removed > 0)
      label += " <tspan fill=\"" + std::string(kVermillion) + "\">(\xE2\x88\x92" + count(removed) +
               ")</tspan>";
    text(s, width - right + 10, y + row / 2 + 4, label);
    s += "</g>";
  }
  const double axis_y = top + row * static_cast<double>(steps.size()) + 2;
  std::vector<std::string> labels;
  for (const double t : ticks) labels.push_back(count(static_cast<std::int64_t>(std::llround(t))));
  x_axis(s, x, axis_y, ticks, labels, "features (pale: into the step, blue: out of it)",
         axis_y + 36);
  s += "</svg>";
  return s;
}

// One histogram bin: counts of values kept and dropped.
struct Bin {
  std::int64_t kept = 0, dropped = 0;
};

namespace {

// A histogram's values on its axis: log10 of them on a log axis, where zero or negative values get
// a bar of their own; values without a finite value are only counted.
struct AxisValues {
  std::vector<double> t;       // the drawn values, in axis units
  std::vector<char> gone;      // per drawn value: dropped
  std::vector<double> cut_at;  // the cuts, in axis units
  Bin zero;                    // zero or negative values on a log axis
  std::int64_t missing = 0;    // NaN or infinite
};

AxisValues axis_values(const ReportHistogram& h) {
  AxisValues a;
  for (std::size_t i = 0; i < h.values.size(); ++i) {
    const double v = h.values[i];
    const bool d = !h.dropped.empty() && h.dropped[i];
    if (std::isnan(v) || std::isinf(v)) {
      ++a.missing;
    } else if (h.log_x && v <= 0) {
      (d ? a.zero.dropped : a.zero.kept)++;
    } else {
      a.t.push_back(h.log_x ? std::log10(v) : v);
      a.gone.push_back(d);
    }
  }
  for (const auto& c : h.cuts)
    if (!h.log_x || c.at > 0) a.cut_at.push_back(h.log_x ? std::log10(c.at) : c.at);
  return a;
}

// The bins: edges anchor + k w for k from kmin to kmax + 1, and their counts.
struct Binning {
  double anchor = 0, w = 0;
  std::int64_t kmin = 0, kmax = 0;
  std::vector<Bin> bins;
};

// The bin width: the histogram's own, else a round width giving about 40 bins (up to 60 on a log
// axis, in steps of a whole or a simple fraction of a decade).
double bin_width(const ReportHistogram& h, double lo, double hi) {
  double w = h.bin_width;
  if (!(w > 0)) {
    if (h.log_x) {
      for (const double c : {0.05, 0.1, 0.2, 0.25, 0.5, 1.0, 2.0, 5.0, 10.0})
        if (w == 0 && (hi - lo) / c <= 60) w = c;
      if (w == 0) w = nice_step(hi - lo, 50);
    } else {
      w = nice_step(hi - lo, 40);
    }
  }
  return w;
}

Binning bin_values(const ReportHistogram& h, const AxisValues& a) {
  double lo = std::isnan(h.lo) ? kNaN : (h.log_x ? std::log10(h.lo) : h.lo);
  double hi = std::isnan(h.hi) ? kNaN : (h.log_x ? std::log10(h.hi) : h.hi);
  for (const double v : a.t) {
    lo = std::isnan(lo) ? v : std::min(lo, v);
    hi = std::isnan(hi) ? v : std::max(hi, v);
  }
  for (const double v : a.cut_at) {
    lo = std::isnan(lo) ? v : std::min(lo, v);
    hi = std::isnan(hi) ? v : std::max(hi, v);
  }
  if (std::isnan(lo)) lo = hi = 0;
  if (hi - lo < 1e-12) {
    lo -= 0.5;
    hi += 0.5;
  }
  Binning b;
  b.w = bin_width(h, lo, hi);
  // Bins are aligned so the first cut is an edge: every bin lies wholly on one side of it. A
  // value on the edge goes to the side the filter keeps it on.
  b.anchor = a.cut_at.empty() ? 0.0 : a.cut_at.front();
  const auto index = [&](double v) {
    const double u = (v - b.anchor) / b.w;
    return static_cast<std::int64_t>(h.cut_keeps_equal_above ? std::floor(u) : std::ceil(u) - 1);
  };
  // The bins covering [lo, hi]; a value on either end is counted in the end bin.
  const auto first_bin = [&] {
    return static_cast<std::int64_t>(std::floor((lo - b.anchor) / b.w + 1e-9));
  };
  const auto last_bin = [&] {
    return std::max(first_bin(),
                    static_cast<std::int64_t>(std::ceil((hi - b.anchor) / b.w - 1e-9)) - 1);
  };
  b.kmin = first_bin();
  b.kmax = last_bin();
  if (b.kmax - b.kmin > 400) {  // never more bins than pixels
    b.w *= static_cast<double>(b.kmax - b.kmin) / 400;
    b.kmin = first_bin();
    b.kmax = last_bin();
  }
  b.bins.resize(static_cast<std::size_t>(b.kmax - b.kmin + 1));
  for (std::size_t i = 0; i < a.t.size(); ++i) {
    const std::int64_t k = std::clamp(index(a.t[i]), b.kmin, b.kmax);
    Bin& bin = b.bins[static_cast<std::size_t>(k - b.kmin)];
    (a.gone[i] ? bin.dropped : bin.kept)++;
  }
  return b;
}

// Draws the bars of one bin, or nothing when it is empty.
class BinDrawer {
 public:
  BinDrawer(std::string& s, const ReportHistogram& h, const Scale& y, double base)
      : s_(s), h_(h), y_(y), base_(base) {}

  // Each non-empty bin is a group with its edges (in data units, %g) and counts, for checks.
  void draw(double x0, double x1, const Bin& b, const std::string& range, double from,
            double to) const {
    if (b.kept + b.dropped <= 0) return;
    s_ += "<g class=\"bin\" data-from=\"" + g(from, 6) + "\" data-to=\"" + g(to, 6) +
          "\" data-count=\"" + std::to_string(b.kept + b.dropped) + "\"";
    if (!h_.dropped.empty()) s_ += " data-dropped=\"" + std::to_string(b.dropped) + "\"";
    s_ += ">";
    const double gap = std::min(1.0, (x1 - x0) * 0.15);
    x0 += gap / 2;
    x1 -= gap / 2;
    const std::string what = " " + h_.count_axis;
    if (b.dropped > 0 && b.kept > 0) {
      const double mid = (x0 + x1) / 2;
      bar(x0, mid, b.dropped, kVermillion,
          esc(range + ": " + count(b.dropped) + what + ", " + h_.dropped_label));
      bar(mid, x1, b.kept, kBlue, esc(range + ": " + count(b.kept) + what + ", " + h_.kept_label));
    } else if (b.dropped > 0) {
      bar(x0, x1, b.dropped, kVermillion,
          esc(range + ": " + count(b.dropped) + what + ", " + h_.dropped_label));
    } else {
      bar(x0, x1, b.kept, kBlue,
          esc(range + ": " + count(b.kept) + what +
              (h_.dropped.empty() ? "" : ", " + h_.kept_label)));
    }
    s_ += "</g>";
  }

 private:
  void bar(double x0, double x1, std::int64_t n, const char* fill, const std::string& title) const {
    if (n <= 0) return;
    const double y0 = y_.raw(std::log10(static_cast<double>(n)));
    rect(s_, x0, y0, x1 - x0, base_ - y0, fill, title);
  }

  std::string& s_;
  const ReportHistogram& h_;
  const Scale& y_;
  double base_;  // the pixel row of the count axis's foot
};

// The ticks and labels of the value axis over [a0, a1] (axis units): powers of ten on a log axis
// (plain values when that would give fewer than 3 ticks).
void value_ticks(const ReportHistogram& h, double a0, double a1, std::vector<double>& ticks,
                 std::vector<std::string>& labels) {
  if (h.log_x) {
    const double span = a1 - a0;
    const double step = span > 24 ? 4 : span > 12 ? 2 : 1;
    for (double e = std::ceil(a0 / step) * step; e <= a1 + 1e-9; e += step) {
      ticks.push_back(e);
      labels.push_back(esc(power_of_ten(static_cast<int>(std::llround(e)))));
    }
    if (ticks.size() < 3) {
      ticks.clear();
      labels.clear();
      for (const double t2 : linear_ticks(a0, a1, 5)) {
        ticks.push_back(t2);
        labels.push_back(esc(g(std::pow(10.0, t2), 2)));
      }
    }
  } else {
    for (const double t2 : linear_ticks(a0, a1, 8)) {
      ticks.push_back(t2);
      labels.push_back(esc(g(t2, 6)));
    }
  }
}

// The cuts, dashed from `top` - 4 down to `foot`, labelled above the plot (alternating heights
// when there are two).
void draw_cuts(std::string& s, const ReportHistogram& h, const Scale& x, double width, double top,
               double foot) {
  for (std::size_t c = 0; c < h.cuts.size(); ++c) {
    if (h.log_x && !(h.cuts[c].at > 0)) continue;
    const double px = x.raw(h.log_x ? std::log10(h.cuts[c].at) : h.cuts[c].at);
    line(s, px, top - 4, px, foot, kInk, 1.5, "5 3");
    const double ty = c % 2 == 0 ? top - 8 : top - 20;
    const char* anchor_side = px > width - 200 ? "end" : "start";
    text(s, px + (px > width - 200 ? -4 : 4), ty, esc(h.cuts[c].label), anchor_side, "cut");
  }
}

}  // namespace

std::string histogram_svg(const ReportHistogram& h, std::string& caption_extra) {
  const double width = 760, left = 74, right = 20, top = 30, bottom = 58, plot_h = 190;
  const double height = top + plot_h + bottom;
  const AxisValues a = axis_values(h);
  const Binning b = bin_values(h, a);
  const Bin& zero = a.zero;
  std::int64_t most = std::max<std::int64_t>(1, zero.kept + zero.dropped);
  for (const auto& bin : b.bins) most = std::max(most, bin.kept + bin.dropped);
  if (h.level > 0) most = std::max(most, static_cast<std::int64_t>(std::ceil(h.level)));
  const int top_power =
      std::max(1, static_cast<int>(std::ceil(std::log10(static_cast<double>(most)) - 1e-9)));
  // log10 counts from 10^-0.3 (half a feature) so a single feature still shows as a bar.
  const Scale y{-0.3, static_cast<double>(top_power), top + plot_h, top};
  const bool has_zero = zero.kept + zero.dropped > 0;
  const double zero_w = has_zero ? 34 : 0;
  const double a0 = b.anchor + static_cast<double>(b.kmin) * b.w,
               a1 = b.anchor + static_cast<double>(b.kmax + 1) * b.w;
  const Scale x{a0, a1, left + zero_w + (has_zero ? 10 : 0), width - right};
  std::string s = svg_open(width, height, h.title);
  log_count_axis(s, y, left, top_power, width - right, h.count_axis + " (log scale)",
                 top + plot_h / 2);

  const auto bin_text = [&](double e0, double e1) {
    const std::string open = h.cut_keeps_equal_above ? "[" : "(",
                      close = h.cut_keeps_equal_above ? ")" : "]";
    return open + g(h.log_x ? std::pow(10.0, e0) : e0) + ", " +
           g(h.log_x ? std::pow(10.0, e1) : e1) + close;
  };
  const BinDrawer drawer(s, h, y, top + plot_h);
  for (std::size_t k = 0; k < b.bins.size(); ++k) {
    const double e0 = b.anchor + static_cast<double>(b.kmin + static_cast<std::int64_t>(k)) * b.w,
                 e1 = e0 + b.w;
    drawer.draw(x.raw(e0), x.raw(e1), b.bins[k], bin_text(e0, e1),
                h.log_x ? std::pow(10.0, e0) : e0, h.log_x ? std::pow(10.0, e1) : e1);
  }
  if (has_zero) drawer.draw(left + 6, left + 6 + zero_w, zero, "0", 0, 0);
  if (h.level > 0) {
    const double py = y.raw(std::log10(h.level));
    line(s, x.r0, py, x.r1, py, kOrange, 1.5, "6 3");
    text(s, x.r1 - 4, py - 5, esc(h.level_label), "end", "cut");
  }

  std::vector<double> ticks;
  std::vector<std::string> labels;
  value_ticks(h, a0, a1, ticks, labels);
  x_axis(s, x, top + plot_h, ticks, labels, h.axis, top + plot_h + 42);
  if (has_zero) {
    line(s, left + 6, top + plot_h, left + 6 + zero_w, top + plot_h, kAxis);
    text(s, left + 6 + zero_w / 2, top + plot_h + 16, "0", "middle", "tick");
  }
  draw_cuts(s, h, x, width, top, top + plot_h);
  s += "</svg>";
  if (a.missing > 0) caption_extra = count(a.missing) + " without a value not shown.";
  return s;
}

// Horizontal bars with names on the left and the value printed at the end; optional q column.
std::string bars_svg(const std::vector<ReportBar>& bars, const std::string& axis, bool show_q,
                     const char* cls, const std::string& aria) {
  const double width = 760, left = 200, right = show_q ? 150 : 70, top = show_q ? 22 : 8, row = 19,
               bottom = 48;
  const double height = top + row * static_cast<double>(bars.size()) + bottom;
  double most = 0;
  bool integers = true;
  for (const auto& b : bars) {
    if (std::isfinite(b.value)) most = std::max(most, b.value);
    integers = integers && std::isfinite(b.value) && b.value == std::round(b.value);
  }
  if (!(most > 0)) most = 1;
  const std::vector<double> ticks = linear_ticks(0, most, 5, integers);
  const Scale x{0, std::max(most, ticks.back()), left, width - right};
  std::string s = svg_open(width, height, aria);
  for (const double t : ticks)
    line(s, x.raw(t), top, x.raw(t), top + row * static_cast<double>(bars.size()), "#eeeeee");
  if (show_q) text(s, width - 12, top - 8, "q-value", "end", "label");
  for (std::size_t k = 0; k < bars.size(); ++k) {
    const ReportBar& b = bars[k];
    const double y = top + row * static_cast<double>(k);
    const double printed = std::isnan(b.shown) ? b.value : b.shown;  // signed r: bar |r|
    s += std::string("<g class=\"") + cls + "\" data-rank=\"" + std::to_string(k + 1) +
         "\" data-name=\"" + esc(b.name) + "\" data-value=\"" + esc(b.raw_value) + "\"";
    if (show_q) s += " data-q=\"" + esc(b.raw_q) + "\"";
    s += "><title>" + std::to_string(k + 1) + ". " + esc(b.name) + ": " + esc(g(printed, 4)) +
         (show_q ? ", q = " + esc(g(b.q, 3)) : std::string()) +
         (b.hover.empty() ? "" : " \xE2\x80\x94 " + esc(b.hover)) + "</title>";
    text(s, left - 8, y + row / 2 + 4, esc_short(b.name, 30), "end");
    const double v = std::isinf(b.value) ? x.d1 : std::max(0.0, b.value);
    rect(s, x(0), y + 3, x(v) - x(0), row - 6, kBlue);
    text(s, x(v) + 5, y + row / 2 + 4, "<tspan class=\"num\">" + esc(g(printed)) + "</tspan>",
         "start", "value");
    if (show_q)
      text(s, width - 12, y + row / 2 + 4, "<tspan class=\"num\">" + esc(g(b.q)) + "</tspan>",
           "end", "value");
    s += "</g>";
  }
  const double axis_y = top + row * static_cast<double>(bars.size()) + 2;
  std::vector<std::string> labels;
  for (const double t : ticks) labels.push_back(esc(g(t, 6)));
  x_axis(s, x, axis_y, ticks, labels, axis, axis_y + 36);
  s += "</svg>";
  return s;
}

std::string scree_svg(const ReportComponents& c) {
  const std::size_t k = c.ratio.size();
  const double width = 760, left = 64, right = 20, top = 16, plot_h = 200, bottom = 52;
  const double height = top + plot_h + bottom;
  const double cum_max = c.cumulative.empty() ? 0 : c.cumulative.back();
  const double y_hi = cum_max > 0.5
                          ? 1.0
                          : std::min(1.0, nice_step(cum_max, 4) *
                                              std::ceil(cum_max / nice_step(cum_max, 4) + 1e-9));
  const Scale y{0, y_hi > 0 ? y_hi : 1, top + plot_h, top};
  const double slot = (width - left - right) / static_cast<double>(std::max<std::size_t>(k, 1));
  std::string s = svg_open(width, height, "Explained variance of each component and cumulative");
  line(s, left, top, left, top + plot_h, kAxis);
  const std::vector<double> y_ticks = linear_ticks(0, y.d1, 5);
  // As many decimals as the tick step needs, in percent.
  const double step_pct = y_ticks.size() > 1 ? 100 * (y_ticks[1] - y_ticks[0]) : 10;
  const int decimals = step_pct >= 1 ? 0 : step_pct >= 0.1 ? 1 : 2;
  for (const double t : y_ticks) {
    line(s, left - 4, y(t), left, y(t), kAxis);
    line(s, left, y(t), width - right, y(t), "#eeeeee");
    text(s, left - 7, y(t) + 4, esc(percent(t, decimals)), "end", "tick");
  }
  s += "<text class=\"label\" text-anchor=\"middle\" transform=\"translate(14 " +
       xy(top + plot_h / 2) + ") rotate(-90)\">share of total variance</text>";
  std::string path;
  const bool label_points = k <= 12;
  for (std::size_t i = 0; i < k; ++i) {
    const double cx = left + slot * (static_cast<double>(i) + 0.5);
    const double bw = std::min(46.0, slot * 0.6);
    s += "<g class=\"component\" data-component=\"" + std::to_string(i + 1) + "\" data-ratio=\"" +
         shortest(c.ratio[i]) + "\"><title>PC" + std::to_string(i + 1) + ": " +
         percent(c.ratio[i], 2) + " of the variance (cumulative " + percent(c.cumulative[i], 2) +
         ")</title>";
    rect(s, cx - bw / 2, y(c.ratio[i]), bw, y(0) - y(c.ratio[i]), kBlue);
    if (label_points) text(s, cx, y(c.ratio[i]) - 5, esc(percent(c.ratio[i])), "middle", "value");
    s += "</g>";
    path += (i == 0 ? "M" : " L") + xy(cx) + " " + xy(y(c.cumulative[i]));
    if (k <= 40 || i % (k / 20 + 1) == 0)
      text(s, cx, top + plot_h + 16, std::to_string(i + 1), "middle", "tick");
  }
  s += "<path d=\"" + path + "\" fill=\"none\" stroke=\"" + kOrange + "\" stroke-width=\"2\"/>";
  for (std::size_t i = 0; i < k; ++i) {
    const double cx = left + slot * (static_cast<double>(i) + 0.5);
    s += "<circle cx=\"" + xy(cx) + "\" cy=\"" + xy(y(c.cumulative[i])) + "\" r=\"3.5\" fill=\"" +
         kOrange + "\"/>";
    if (label_points && i + 1 == k)
      text(s, cx + 6, y(c.cumulative[i]) - 6, esc("cumulative " + percent(c.cumulative[i])),
           cx > width - 200 ? "end" : "start", "value");
  }
  line(s, left, top + plot_h, width - right, top + plot_h, kAxis);
  text(s, (left + width - right) / 2, top + plot_h + 40, "principal component", "middle", "label");
  s += "</svg>";
  return s;
}

std::string ramp_colour(double t) {
  if (std::isnan(t)) t = 0.5;
  t = std::clamp(t, 0.0, 1.0) * static_cast<double>(kRampStopCount - 1);
  const auto k = std::min(static_cast<std::size_t>(t), kRampStopCount - 2);
  const double f = t - static_cast<double>(k);
  const auto channel = [](const char* hex, int at) {
    return std::stoi(std::string(hex + 1 + 2 * at, 2), nullptr, 16);
  };
  static constexpr char kDigits[] = "0123456789ABCDEF";
  std::string out = "#";
  for (int at = 0; at < 3; ++at) {
    const double a = channel(kRampStops[k], at), b = channel(kRampStops[k + 1], at);
    const auto v = static_cast<int>(std::lround(a + f * (b - a)));
    out += kDigits[v / 16];
    out += kDigits[v % 16];
  }
  return out;
}

std::string ramp_swatch() {
  std::string s = "<svg width=\"70\" height=\"12\" viewBox=\"0 0 70 12\" aria-hidden=\"true\">";
  for (std::size_t k = 0; k < kRampStopCount; ++k)
    s += "<rect x=\"" + std::to_string(10 * k) + "\" y=\"1\" width=\"10\" height=\"10\" fill=\"" +
         kRampStops[k] + "\"/>";
  return s + "</svg>";
}

Classes classes_of(const ReportSamples& d) {
  Classes c;
  if (d.labels.empty() && !d.target.empty()) {
    // A continuous target: each sample on the ramp, linear in its value over the target's range;
    // samples without a value grey, in a group of their own.
    for (const double v : d.target)
      if (std::isfinite(v)) {
        c.lo = std::isnan(c.lo) ? v : std::min(c.lo, v);
        c.hi = std::isnan(c.hi) ? v : std::max(c.hi, v);
      }
    c.names = {d.label_name.empty() ? std::string("target") : d.label_name};
    c.colours = {ramp_colour(0.5)};
    c.counts = {0};
    for (const double v : d.target) {
      const bool has = std::isfinite(v);
      if (!has && !c.has_missing) {
        c.has_missing = true;
        c.names.push_back("no value");
        c.colours.push_back(kMissing);
        c.counts.push_back(0);
      }
      c.of.push_back(has ? 0 : 1);
      ++c.counts[has ? 0 : 1];
      c.sample_colours.push_back(!has          ? std::string(kMissing)
                                 : c.hi > c.lo ? ramp_colour((v - c.lo) / (c.hi - c.lo))
                                               : ramp_colour(0.5));
    }
    return c;
  }
  if (d.labels.empty()) {
    c.names = {"all samples"};
    c.counts = {static_cast<std::int64_t>(d.ids.size())};
    c.colours = {colour_of(0)};
    c.of.assign(d.ids.size(), 0);
    return c;
  }
  // Classes sorted by name; samples without a label last, so they take no class's colour.
  std::map<std::string, std::size_t> index;
  bool unlabelled = false;
  for (const auto& l : d.labels) {
    if (l.empty())
      unlabelled = true;
    else
      index.emplace(l, 0);
  }
  for (auto& [name, i] : index) {
    i = c.names.size();
    c.colours.push_back(colour_of(c.names.size()));
    c.names.push_back(name);
  }
  if (unlabelled) {
    index[""] = c.names.size();
    c.names.push_back("no label");
    c.colours.push_back(kMissing);
    c.has_missing = true;
  }
  c.counts.assign(c.names.size(), 0);
  for (const auto& l : d.labels) {
    c.of.push_back(index[l]);
    c.counts[index[l]]++;
  }
  return c;
}

const char* colour_of(std::size_t k) {
  return k < kClassColourCount ? kClassColours[k] : kOther;
}

std::string scatter_svg(const std::vector<double>& xs, const std::vector<double>& ys,
                        const std::vector<std::size_t>& sample_of, const ReportSamples& d,
                        const Classes& classes, const std::string& x_label,
                        const std::string& y_label, const std::string& aria) {
  const std::size_t n = xs.size();
  const double width = 470, height = 430, left = 78, right = 14, top = 24, bottom = 54;
  const auto range = [](const std::vector<double>& v) {
    double lo = v.empty() ? -1 : v[0], hi = lo;
    for (const double a : v) {
      lo = std::min(lo, a);
      hi = std::max(hi, a);
    }
    const double pad = hi > lo ? (hi - lo) * 0.05 : 1;
    return std::pair<double, double>{lo - pad, hi + pad};
  };
  const auto [x_lo, x_hi] = range(xs);
  const auto [y_lo, y_hi] = range(ys);
  const Scale x{x_lo, x_hi, left, width - right};
  const Scale y{y_lo, y_hi, height - bottom, top};
  const bool flagged_any = !d.flagged.empty();
  // Thin past kReportMaxPoints: every stride-th sample, and every flagged one.
  const std::size_t stride =
      n > kReportMaxPoints ? (n + kReportMaxPoints - 1) / kReportMaxPoints : 1;
  std::size_t drawn = 0;
  std::string s = svg_open(width, height, aria);
  line(s, left, top, left, height - bottom, kAxis);
  std::vector<double> ticks = linear_ticks(y_lo, y_hi, 6);
  for (const double t : ticks) {
    line(s, left - 4, y(t), left, y(t), kAxis);
    line(s, left, y(t), width - right, y(t), "#f0f0f0");
    text(s, left - 7, y(t) + 4, esc(g(t, 4)), "end", "tick");
  }
  ticks = linear_ticks(x_lo, x_hi, 6);
  for (const double t : ticks) line(s, x(t), top, x(t), height - bottom, "#f0f0f0");
  std::vector<std::string> labels;
  for (const double t : ticks) labels.push_back(esc(g(t, 4)));
  x_axis(s, x, height - bottom, ticks, labels, x_label, height - bottom + 38);
  s += "<text class=\"label\" text-anchor=\"middle\" transform=\"translate(14 " +
       xy((top + height - bottom) / 2) + ") rotate(-90)\">" + esc(y_label) + "</text>";
  const double r = n <= 500 ? 3.4 : n <= 1500 ? 2.6 : 2.0;
  std::string rings, names;
  std::size_t named = 0;
  std::vector<std::pair<double, double>> label_at;  // where names are written, to avoid overlaps
  for (std::size_t row = 0; row < n; ++row) {
    const std::size_t i = sample_of.empty() ? row : sample_of[row];
    const bool flag = flagged_any && d.flagged[i];
    if (row % stride != 0 && !flag) continue;
    ++drawn;
    std::string title = esc(d.ids[i]);
    if (!d.labels.empty())
      title += " \xC2\xB7 " + esc(d.labels[i].empty() ? "no label" : d.labels[i]);
    if (d.labels.empty() && i < d.target.size())
      title += " \xC2\xB7 " + esc(d.label_name.empty() ? "target" : d.label_name) + " " +
               (std::isfinite(d.target[i]) ? esc(g(d.target[i], 4)) : std::string("no value"));
    if (!d.marks.empty())
      title +=
          " \xC2\xB7 " + esc(d.mark_name) + " " + esc(d.marks[i].empty() ? "missing" : d.marks[i]);
    if (d.screened) title += " \xC2\xB7 distance " + esc(g(d.distance[i]));
    if (flag) title += " \xC2\xB7 flagged outlier";
    if (!d.dropped.empty() && d.dropped[i]) title += " (dropped)";
    // On the target's ramp every dot has its own colour, outlined so the lightest stay visible.
    s += "<circle cx=\"" + xy(x(xs[row])) + "\" cy=\"" + xy(y(ys[row])) + "\" r=\"" + xy(r) +
         "\" fill=\"" +
         (classes.ramp() ? classes.sample_colours[i] : classes.colours[classes.of[i]]) +
         "\" fill-opacity=\"0.8\"" +
         (classes.ramp() ? std::string(" stroke=\"") + kAxis + "\" stroke-width=\"0.5\""
                         : std::string()) +
         "><title>" + title + "</title></circle>";
    if (flag) {
      rings += "<circle cx=\"" + xy(x(xs[row])) + "\" cy=\"" + xy(y(ys[row])) + "\" r=\"" +
               xy(r + 3) + "\" fill=\"none\" stroke=\"" + kInk + "\" stroke-width=\"1.5\"><title>" +
               title + "</title></circle>";
      // Name at most 12 flagged samples, and none whose name would cover another's: the ring
      // and the tooltip still mark it.
      const double px = x(xs[row]), py = y(ys[row]);
      bool clear = named < 12;
      for (const auto& [ax, ay] : label_at)
        clear = clear && (std::abs(ax - px) > 70 || std::abs(ay - py) > 13);
      if (clear) {
        ++named;
        label_at.emplace_back(px, py);
        const bool east = px < width - 90;
        std::string t;
        text(t, px + (east ? r + 5 : -r - 5), py - r - 2, esc_short(d.ids[i], 16),
             east ? "start" : "end", "flag");
        names += t;
      }
    }
  }
  s += rings + names;
  if (stride > 1)
    text(
        s, width - right, top - 8,
        esc(count(static_cast<std::int64_t>(drawn)) + " of " + count(static_cast<std::int64_t>(n)) +
            " samples drawn (one in " + std::to_string(stride) + ", and every flagged one)"),
        "end", "note");
  s += "</svg>";
  return s;
}

}  // namespace internal::html

}  // namespace pare
