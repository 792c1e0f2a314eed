#include "pare/report.h"

#include <algorithm>    // std::max, std::min, std::sort, std::stable_sort
#include <charconv>     // std::to_chars
#include <cmath>        // std::log10, std::pow, std::floor, std::ceil, std::isnan, std::isinf
#include <cstdio>       // std::snprintf
#include <map>          // std::map
#include <string_view>  // std::string_view

#include "internal/format.h"
#include "internal/plan_document.h"
#include "internal/report_html.h"
#include <nlohmann/json.hpp>

namespace pare {

// The helpers are shared with src/report_plots.cpp (declared in internal/report_html.h, where
// the palette is).
namespace internal::html {

// ---- text
// -----------------------------------------------------------------------------------------

// Valid UTF-8 with nothing an HTML parser reports as an error: invalid bytes, C0 and C1 controls
// (tab and line feed excepted) and non-characters become U+FFFD. Names come from data files and
// may hold anything.
std::string clean(std::string_view s) {
  static constexpr std::string_view kReplacement = "\xEF\xBF\xBD";
  std::string out;
  out.reserve(s.size());
  std::size_t i = 0;
  while (i < s.size()) {
    const auto b = static_cast<unsigned char>(s[i]);
    std::size_t len = 0;
    char32_t cp = 0;
    if (b < 0x80) {
      len = 1;
      cp = b;
    } else if (b >= 0xC2 && b <= 0xDF) {
      len = 2;
      cp = b & 0x1Fu;
    } else if (b >= 0xE0 && b <= 0xEF) {
      len = 3;
      cp = b & 0x0Fu;
    } else if (b >= 0xF0 && b <= 0xF4) {
      len = 4;
      cp = b & 0x07u;
    }
    bool ok = len > 0 && i + len <= s.size();
    for (std::size_t k = 1; ok && k < len; ++k) {
      const auto c = static_cast<unsigned char>(s[i + k]);
      if ((c & 0xC0u) != 0x80u) ok = false;
      cp = (cp << 6) | (c & 0x3Fu);
    }
    // Overlong forms, surrogates and values past U+10FFFF are not UTF-8.
    if (ok && ((len == 3 && cp < 0x800) || (len == 4 && (cp < 0x10000 || cp > 0x10FFFF)) ||
               (cp >= 0xD800 && cp <= 0xDFFF)))
      ok = false;
    if (!ok) {
      out += kReplacement;
      ++i;
      continue;
    }
    const bool control = (cp < 0x20 && cp != '\t' && cp != '\n') || (cp >= 0x7F && cp <= 0x9F);
    const bool nonchar = (cp >= 0xFDD0 && cp <= 0xFDEF) || (cp & 0xFFFEu) == 0xFFFEu;
    if (control || nonchar)
      out += kReplacement;
    else
      out.append(s.substr(i, len));
    i += len;
  }
  return out;
}

// `s` (clean UTF-8) cut to at most `max` code points, the last one an ellipsis when cut.
std::string shorten(const std::string& s, std::size_t max) {
  std::size_t count = 0, i = 0, cut = std::string::npos;
  while (i < s.size()) {
    if (count == max - 1) cut = i;
    ++count;
    const auto b = static_cast<unsigned char>(s[i]);
    i += b < 0x80 ? 1 : b < 0xE0 ? 2 : b < 0xF0 ? 3 : 4;
  }
  if (count <= max) return s;
  return s.substr(0, cut) + "\xE2\x80\xA6";
}

// HTML-escaped text (also safe inside a quoted attribute).
std::string esc(std::string_view raw) {
  const std::string s = clean(raw);
  std::string out;
  out.reserve(s.size() + 8);
  for (char c : s) {
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
      case '\'':
        out += "&#39;";
        break;
      default:
        out += c;
    }
  }
  return out;
}

std::string esc_short(std::string_view raw, std::size_t max) {
  return esc(shorten(clean(raw), max));
}

// 12345678 -> "12,345,678".
std::string count(std::int64_t v) {
  const std::string digits = std::to_string(v < 0 ? -v : v);
  std::string out;
  const std::size_t lead = digits.size() % 3;
  for (std::size_t i = 0; i < digits.size(); ++i) {
    if (i > 0 && (i + 3 - lead) % 3 == 0) out += ',';
    out += digits[i];
  }
  return v < 0 ? "\xE2\x88\x92" + out : out;
}

// `digits` significant digits as printf's %g writes them (so a checker can reproduce the text).
std::string g(double v, int digits) {
  if (std::isnan(v)) return "NA";
  if (std::isinf(v)) return v > 0 ? "inf" : "-inf";
  char buffer[48];
  std::snprintf(buffer, sizeof buffer, "%.*g", digits, v);
  return buffer;
}

std::string percent(double fraction, int decimals) {
  char buffer[48];
  std::snprintf(buffer, sizeof buffer, "%.*f%%", decimals, 100 * fraction);
  return buffer;
}

// An SVG coordinate: one decimal is a tenth of a pixel, finer than a screen or printer shows.
std::string xy(double v) {
  char buffer[32];
  const auto r = std::to_chars(buffer, buffer + sizeof buffer, std::round(v * 10) / 10,
                               std::chars_format::fixed, 1);
  std::string s(buffer, r.ptr);
  if (s.size() > 2 && s.compare(s.size() - 2, 2, ".0") == 0) s.resize(s.size() - 2);
  return s == "-0" ? "0" : s;
}

std::string shortest(double v) {
  std::string out;
  internal::append_number(out, v);
  return out;
}

std::string shortest(float v) {
  std::string out;
  internal::append_number(out, v);
  return out;
}

// 10 with a superscript exponent, e.g. 10⁻⁸.
std::string power_of_ten(int e) {
  static const char* digits[] = {"\xE2\x81\xB0", "\xC2\xB9",     "\xC2\xB2",     "\xC2\xB3",
                                 "\xE2\x81\xB4", "\xE2\x81\xB5", "\xE2\x81\xB6", "\xE2\x81\xB7",
                                 "\xE2\x81\xB8", "\xE2\x81\xB9"};
  if (e == 0) return "1";
  if (e == 1) return "10";
  std::string out = "10";
  if (e < 0) out += "\xE2\x81\xBB";
  const std::string d = std::to_string(e < 0 ? -e : e);
  for (char c : d) out += digits[c - '0'];
  return out;
}

std::string shell_quote(const std::string& word) {
  if (!word.empty() &&
      word.find_first_not_of(
          "abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789-_./=:,+@%") ==
          std::string::npos)
    return word;
  std::string out = "'";
  for (char c : word) out += c == '\'' ? std::string("'\\''") : std::string(1, c);
  return out + "'";
}

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

std::string histogram_svg(const ReportHistogram& h, std::string& caption_extra) {
  const double width = 760, left = 74, right = 20, top = 30, bottom = 58, plot_h = 190;
  const double height = top + plot_h + bottom;
  // Axis values of the finite values; zero or negative values on a log axis get their own bar.
  std::vector<double> t;
  std::vector<char> gone;
  Bin zero;
  std::int64_t missing = 0;
  for (std::size_t i = 0; i < h.values.size(); ++i) {
    const double v = h.values[i];
    const bool d = !h.dropped.empty() && h.dropped[i];
    if (std::isnan(v) || std::isinf(v)) {
      ++missing;
    } else if (h.log_x && v <= 0) {
      (d ? zero.dropped : zero.kept)++;
    } else {
      t.push_back(h.log_x ? std::log10(v) : v);
      gone.push_back(d);
    }
  }
  std::vector<double> cut_at;
  for (const auto& c : h.cuts)
    if (!h.log_x || c.at > 0) cut_at.push_back(h.log_x ? std::log10(c.at) : c.at);
  double lo = std::isnan(h.lo) ? kNaN : (h.log_x ? std::log10(h.lo) : h.lo);
  double hi = std::isnan(h.hi) ? kNaN : (h.log_x ? std::log10(h.hi) : h.hi);
  for (const double v : t) {
    lo = std::isnan(lo) ? v : std::min(lo, v);
    hi = std::isnan(hi) ? v : std::max(hi, v);
  }
  for (const double v : cut_at) {
    lo = std::isnan(lo) ? v : std::min(lo, v);
    hi = std::isnan(hi) ? v : std::max(hi, v);
  }
  if (std::isnan(lo)) lo = hi = 0;
  if (hi - lo < 1e-12) {
    lo -= 0.5;
    hi += 0.5;
  }
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
  // Bins are aligned so the first cut is an edge: every bin lies wholly on one side of it. A
  // value on the edge goes to the side the filter keeps it on.
  const double anchor = cut_at.empty() ? 0.0 : cut_at.front();
  const auto index = [&](double v) {
    const double u = (v - anchor) / w;
    return static_cast<std::int64_t>(h.cut_keeps_equal_above ? std::floor(u) : std::ceil(u) - 1);
  };
  // The bins covering [lo, hi]; a value on either end is counted in the end bin.
  const auto first_bin = [&] {
    return static_cast<std::int64_t>(std::floor((lo - anchor) / w + 1e-9));
  };
  const auto last_bin = [&] {
    return std::max(first_bin(),
                    static_cast<std::int64_t>(std::ceil((hi - anchor) / w - 1e-9)) - 1);
  };
  std::int64_t kmin = first_bin(), kmax = last_bin();
  if (kmax - kmin > 400) {  // never more bins than pixels
    w *= static_cast<double>(kmax - kmin) / 400;
    kmin = first_bin();
    kmax = last_bin();
  }
  std::vector<Bin> bins(static_cast<std::size_t>(kmax - kmin + 1));
  for (std::size_t i = 0; i < t.size(); ++i) {
    const std::int64_t k = std::clamp(index(t[i]), kmin, kmax);
    Bin& b = bins[static_cast<std::size_t>(k - kmin)];
    (gone[i] ? b.dropped : b.kept)++;
  }
  std::int64_t most = std::max<std::int64_t>(1, zero.kept + zero.dropped);
  for (const auto& b : bins) most = std::max(most, b.kept + b.dropped);
  if (h.level > 0) most = std::max(most, static_cast<std::int64_t>(std::ceil(h.level)));
  const int top_power =
      std::max(1, static_cast<int>(std::ceil(std::log10(static_cast<double>(most)) - 1e-9)));
  // log10 counts from 10^-0.3 (half a feature) so a single feature still shows as a bar.
  const Scale y{-0.3, static_cast<double>(top_power), top + plot_h, top};
  const bool has_zero = zero.kept + zero.dropped > 0;
  const double zero_w = has_zero ? 34 : 0;
  const double a0 = anchor + static_cast<double>(kmin) * w,
               a1 = anchor + static_cast<double>(kmax + 1) * w;
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
  const auto bar = [&](double x0, double x1, std::int64_t n, const char* fill,
                       const std::string& title) {
    if (n <= 0) return;
    const double y0 = y.raw(std::log10(static_cast<double>(n)));
    rect(s, x0, y0, x1 - x0, top + plot_h - y0, fill, title);
  };
  // Each non-empty bin is a group with its edges (in data units, %g) and counts, for checks.
  const auto draw_bin = [&](double x0, double x1, const Bin& b, const std::string& range,
                            double from, double to) {
    if (b.kept + b.dropped <= 0) return;
    s += "<g class=\"bin\" data-from=\"" + g(from, 6) + "\" data-to=\"" + g(to, 6) +
         "\" data-count=\"" + std::to_string(b.kept + b.dropped) + "\"";
    if (!h.dropped.empty()) s += " data-dropped=\"" + std::to_string(b.dropped) + "\"";
    s += ">";
    const double gap = std::min(1.0, (x1 - x0) * 0.15);
    x0 += gap / 2;
    x1 -= gap / 2;
    const std::string what = " " + h.count_axis;
    if (b.dropped > 0 && b.kept > 0) {
      const double mid = (x0 + x1) / 2;
      bar(x0, mid, b.dropped, kVermillion,
          esc(range + ": " + count(b.dropped) + what + ", " + h.dropped_label));
      bar(mid, x1, b.kept, kBlue, esc(range + ": " + count(b.kept) + what + ", " + h.kept_label));
    } else if (b.dropped > 0) {
      bar(x0, x1, b.dropped, kVermillion,
          esc(range + ": " + count(b.dropped) + what + ", " + h.dropped_label));
    } else {
      bar(x0, x1, b.kept, kBlue,
          esc(range + ": " + count(b.kept) + what +
              (h.dropped.empty() ? "" : ", " + h.kept_label)));
    }
    s += "</g>";
  };
  for (std::size_t k = 0; k < bins.size(); ++k) {
    const double e0 = anchor + static_cast<double>(kmin + static_cast<std::int64_t>(k)) * w,
                 e1 = e0 + w;
    draw_bin(x.raw(e0), x.raw(e1), bins[k], bin_text(e0, e1), h.log_x ? std::pow(10.0, e0) : e0,
             h.log_x ? std::pow(10.0, e1) : e1);
  }
  if (has_zero) draw_bin(left + 6, left + 6 + zero_w, zero, "0", 0, 0);
  if (h.level > 0) {
    const double py = y.raw(std::log10(h.level));
    line(s, x.r0, py, x.r1, py, kOrange, 1.5, "6 3");
    text(s, x.r1 - 4, py - 5, esc(h.level_label), "end", "cut");
  }

  // x axis: powers of ten on a log axis (plain values when that would give fewer than 3 ticks).
  std::vector<double> ticks;
  std::vector<std::string> labels;
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
  x_axis(s, x, top + plot_h, ticks, labels, h.axis, top + plot_h + 42);
  if (has_zero) {
    line(s, left + 6, top + plot_h, left + 6 + zero_w, top + plot_h, kAxis);
    text(s, left + 6 + zero_w / 2, top + plot_h + 16, "0", "middle", "tick");
  }
  // The cuts, dashed, labelled above the plot (alternating heights when there are two).
  for (std::size_t c = 0; c < h.cuts.size(); ++c) {
    if (h.log_x && !(h.cuts[c].at > 0)) continue;
    const double px = x.raw(h.log_x ? std::log10(h.cuts[c].at) : h.cuts[c].at);
    line(s, px, top - 4, px, top + plot_h, kInk, 1.5, "5 3");
    const double ty = c % 2 == 0 ? top - 8 : top - 20;
    const char* anchor_side = px > width - 200 ? "end" : "start";
    text(s, px + (px > width - 200 ? -4 : 4), ty, esc(h.cuts[c].label), anchor_side, "cut");
  }
  s += "</svg>";
  if (missing > 0) caption_extra = count(missing) + " without a value not shown.";
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
    s += std::string("<g class=\"") + cls + "\" data-rank=\"" + std::to_string(k + 1) +
         "\" data-name=\"" + esc(b.name) + "\" data-value=\"" + esc(b.raw_value) + "\"";
    if (show_q) s += " data-q=\"" + esc(b.raw_q) + "\"";
    s += "><title>" + std::to_string(k + 1) + ". " + esc(b.name) + ": " + esc(g(b.value, 4)) +
         (show_q ? ", q = " + esc(g(b.q, 3)) : std::string()) +
         (b.hover.empty() ? "" : " \xE2\x80\x94 " + esc(b.hover)) + "</title>";
    text(s, left - 8, y + row / 2 + 4, esc_short(b.name, 30), "end");
    const double v = std::isinf(b.value) ? x.d1 : std::max(0.0, b.value);
    rect(s, x(0), y + 3, x(v) - x(0), row - 6, kBlue);
    text(s, x(v) + 5, y + row / 2 + 4, "<tspan class=\"num\">" + esc(g(b.value)) + "</tspan>",
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

Classes classes_of(const ReportSamples& d) {
  Classes c;
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
    if (!d.marks.empty())
      title +=
          " \xC2\xB7 " + esc(d.mark_name) + " " + esc(d.marks[i].empty() ? "missing" : d.marks[i]);
    if (d.screened) title += " \xC2\xB7 distance " + esc(g(d.distance[i]));
    if (flag) title += " \xC2\xB7 flagged outlier";
    if (!d.dropped.empty() && d.dropped[i]) title += " (dropped)";
    s += "<circle cx=\"" + xy(x(xs[row])) + "\" cy=\"" + xy(y(ys[row])) + "\" r=\"" + xy(r) +
         "\" fill=\"" + classes.colours[classes.of[i]] + "\" fill-opacity=\"0.8\"><title>" + title +
         "</title></circle>";
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

// ---- page
// --------------------------------------------------------------------------------------------

constexpr const char* kStyle = R"(
:root { color-scheme: light; }
* { box-sizing: border-box; }
body { margin: 0 auto; max-width: 1000px; padding: 28px 28px 60px; background: #fff; color: #1a1a1a;
  font: 15px/1.5 system-ui, -apple-system, "Segoe UI", "DejaVu Sans", "Helvetica Neue", Arial,
  sans-serif; }
header { border-bottom: 3px solid #0072B2; padding-bottom: 10px; }
h1 { font-size: 1.55em; margin: 0 0 4px; font-weight: 650; }
h2 { font-size: 1.2em; margin: 0 0 6px; font-weight: 650; }
h3 { font-size: 1em; margin: 16px 0 4px; font-weight: 650; }
.sub { color: #595959; margin: 0; }
section { margin-top: 30px; }
.lead { margin: 0 0 10px; color: #333; max-width: 52em; }
ul.glance { margin: 8px 0 0; padding-left: 1.2em; font-size: 1.05em; }
ul.glance li { margin: 3px 0; }
figure { margin: 6px 0 0; }
figcaption { color: #595959; font-size: 0.88em; margin-top: 2px; max-width: 56em; }
svg { display: block; max-width: 100%; height: auto; }
svg text { font-family: inherit; font-size: 12px; fill: #1a1a1a; }
svg text.tick { fill: #595959; font-size: 11px; }
svg text.label { font-size: 12.5px; fill: #333; }
svg text.value { font-size: 11px; fill: #333; }
svg text.cut { font-size: 11.5px; font-weight: 600; }
svg text.flag { font-size: 10.5px; font-weight: 600; }
svg text.note { font-size: 11px; fill: #595959; font-style: italic; }
.num { font-variant-numeric: tabular-nums; }
.pair { display: grid; grid-template-columns: 1fr 1fr; gap: 18px; }
@media (max-width: 820px) { .pair { grid-template-columns: 1fr; } }
.legend { margin: 4px 0 0; padding: 0; list-style: none; font-size: 0.88em; color: #333;
  display: flex; flex-wrap: wrap; gap: 4px 16px; }
.legend svg { display: inline-block; vertical-align: -2px; }
.none { color: #595959; font-style: italic; }
.caution { border-left: 3px solid #E69F00; padding: 2px 0 2px 10px; max-width: 52em; }
.strips { display: grid; grid-template-columns: repeat(3, 1fr); gap: 8px 14px; }
@media (max-width: 820px) { .strips { grid-template-columns: 1fr 1fr; } }
.flagged { color: #1a1a1a; }
table { border-collapse: collapse; font-size: 0.88em; margin-top: 4px; }
th, td { text-align: left; vertical-align: top; padding: 3px 12px 3px 0;
  border-bottom: 1px solid #e6e6e6; }
th { font-weight: 600; color: #333; }
td.n { text-align: right; font-variant-numeric: tabular-nums; }
code, .mono { font-family: "DejaVu Sans Mono", ui-monospace, Menlo, Consolas, monospace;
  font-size: 0.86em; word-break: break-all; }
pre.cmd { white-space: pre-wrap; word-break: break-all; background: #f5f7f9;
  border-left: 3px solid #0072B2; padding: 8px 10px; margin: 4px 0; }
footer { margin-top: 36px; color: #595959; font-size: 0.85em; border-top: 1px solid #e6e6e6;
  padding-top: 8px; }
@media print {
  body { max-width: none; padding: 0; font-size: 10.5pt; }
  section { break-inside: avoid; page-break-inside: avoid; }
  section.record { break-inside: auto; page-break-inside: auto; }
  header { border-bottom-color: #000; }
  pre.cmd { background: none; border-left-color: #000; }
  * { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  @page { margin: 14mm; }
}
)";

std::string swatch(const char* colour, Mark mark) {
  std::string s = "<svg width=\"14\" height=\"12\" viewBox=\"0 0 14 12\" aria-hidden=\"true\">";
  if (mark == Mark::kLine)
    s += std::string("<line x1=\"0\" y1=\"6\" x2=\"14\" y2=\"6\" stroke=\"") + colour +
         "\" stroke-width=\"2\"/>";
  else if (mark == Mark::kRing)
    s += std::string("<circle cx=\"7\" cy=\"6\" r=\"4.5\" fill=\"none\" stroke=\"") + colour +
         "\" stroke-width=\"1.5\"/>";
  else if (mark == Mark::kDot)
    s += std::string("<circle cx=\"7\" cy=\"6\" r=\"4\" fill=\"") + colour + "\"/>";
  else
    s += std::string("<rect x=\"1\" y=\"1\" width=\"12\" height=\"10\" fill=\"") + colour + "\"/>";
  return s + "</svg>";
}

std::string figure(const std::string& svg, const std::string& caption) {
  return "<figure>" + svg + (caption.empty() ? "" : "<figcaption>" + caption + "</figcaption>") +
         "</figure>\n";
}

std::string name_list(const std::vector<std::string>& names, std::size_t max) {
  std::string out;
  for (std::size_t i = 0; i < names.size() && i < max; ++i) out += (i ? ", " : "") + esc(names[i]);
  if (names.size() > max)
    out += " and " + count(static_cast<std::int64_t>(names.size() - max)) + " more";
  return out;
}

}  // namespace internal::html

using namespace internal::html;

std::string report_html(const ReportData& d) {
  std::string h;
  h.reserve(1 << 16);
  h += "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
       "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n";
  h += "<title>" + esc(d.title) + "</title>\n<style>" + kStyle + "</style>\n</head>\n<body>\n";
  h += "<header><h1>" + esc(d.title) + "</h1><p class=\"sub\">pare " + esc(d.record.version) +
       " \xC2\xB7 " + esc(d.command) + " \xC2\xB7 " + count(d.samples) + " samples \xC3\x97 " +
       count(d.features) + " features</p></header>\n";

  // At a glance: what a newcomer should take away without reading further.
  const Classes classes = classes_of(d.sample_info);
  const ReportSamples& si = d.sample_info;
  std::vector<std::string> flagged_names, dropped_names;
  for (std::size_t i = 0; i < si.flagged.size(); ++i)
    if (si.flagged[i]) flagged_names.push_back(si.ids[i]);
  for (std::size_t i = 0; i < si.dropped.size(); ++i)
    if (si.dropped[i]) dropped_names.push_back(si.ids[i]);
  h += "<section id=\"glance\"><h2>At a glance</h2><ul class=\"glance\">";
  for (const auto& line_text : d.glance) h += "<li>" + esc(line_text) + "</li>";
  if (!d.steps.empty() && d.command == "reduce") {
    const std::int64_t in = d.steps.front().in, out = d.steps.back().out;
    h += "<li><strong class=\"num\">" + count(in) +
         "</strong> features in, <strong class=\"num\">" + count(out) + "</strong> kept (" +
         esc(percent(in > 0 ? static_cast<double>(out) / static_cast<double>(in) : 0)) +
         "); the funnel shows what each step removed.</li>";
  }
  if (!d.ranking.bars.empty()) {
    const ReportBar& b = d.ranking.bars.front();
    h += "<li>Leading feature: <strong>" + esc(b.name) + "</strong> (" + esc(d.ranking.criterion) +
         " " + esc(g(b.value)) + (std::isnan(b.q) ? std::string() : ", q " + esc(g(b.q))) +
         ").</li>";
  }
  if (!si.ids.empty()) {
    h += "<li>" + count(static_cast<std::int64_t>(si.ids.size())) + " samples";
    if (!si.labels.empty()) {
      const std::size_t real = classes.names.size() - (classes.has_missing ? 1 : 0);
      h += " in " + std::to_string(real) + " classes (";
      for (std::size_t k = 0; k < real; ++k)
        h += (k ? ", " : "") + esc(classes.names[k]) + " " + count(classes.counts[k]);
      if (classes.has_missing) h += "; " + count(classes.counts.back()) + " without a label";
      h += ")";
    }
    if (!si.screened) {
      h += "; not screened for outliers (" + esc(si.rule) + ").</li>";
    } else if (flagged_names.empty()) {
      h += "; none flagged as an outlier.</li>";
    } else {
      h += "; <strong>" + count(static_cast<std::int64_t>(flagged_names.size())) +
           " flagged</strong> as outliers: " + name_list(flagged_names, 10) +
           (dropped_names.empty() ? " (kept; --drop-outliers would remove them)."
                                  : " (removed before the reduction).") +
           "</li>";
    }
  }
  if (!d.components.ratio.empty()) {
    h += "<li>The first " + std::to_string(d.components.ratio.size()) +
         " principal components carry " + esc(percent(d.components.cumulative.back())) +
         " of the variance of " + esc(d.components.source) + ".</li>";
  }
  h += "</ul></section>\n";

  if (!d.steps.empty()) {
    h += "<section id=\"funnel\"><h2>Selection funnel</h2><p class=\"lead\">Features into and out "
         "of every step, in "
         "the order they ran; the numbers are plan.json's step counts.</p>";
    h += figure(funnel_svg(d.steps), "");
    h += "</section>\n";
  }

  if (!d.histograms.empty()) {
    h += d.command == "scan" ? "<section id=\"distributions\"><h2>Distributions</h2><p "
                               "class=\"lead\">Distributions over features; a "
                               "dashed line marks a threshold, and vermillion bars are features "
                               "scan flags (it removes nothing).</p>"
                             : "<section id=\"distributions\"><h2>Where the filters cut</h2><p "
                               "class=\"lead\">Distributions over "
                               "features; a dashed line marks a threshold, and bars are vermillion "
                               "where the filter removed the "
                               "features.</p>";
    for (const auto& hist : d.histograms) {
      std::string extra;
      const std::string svg = histogram_svg(hist, extra);
      std::string legend;
      if (!hist.dropped.empty()) {
        std::int64_t gone = 0;
        for (const char c : hist.dropped) gone += c != 0;
        legend = "<ul class=\"legend\"><li>" + swatch(kBlue) + " " + esc(hist.kept_label) + " " +
                 count(static_cast<std::int64_t>(hist.dropped.size()) - gone) + "</li><li>" +
                 swatch(kVermillion) + " " + esc(hist.dropped_label) + " " + count(gone) +
                 "</li></ul>";
      }
      h += "<h3 id=\"" + esc(hist.id) + "\">" + esc(hist.title) + "</h3>";
      h += figure(svg + legend, esc(hist.caption) + (extra.empty() ? "" : " " + esc(extra)));
    }
    h += "</section>\n";
  }

  if (!d.ranking.bars.empty() || !d.ranking_note.empty() || !d.score_curve.values.empty() ||
      !d.p_values.values.empty()) {
    h += "<section id=\"ranking\"><h2>Leading features</h2>";
    if (d.ranking.bars.empty()) {
      if (!d.ranking_note.empty()) h += "<p class=\"none\">" + esc(d.ranking_note) + "</p>";
    } else {
      h += "<p class=\"lead\">The first " + std::to_string(d.ranking.bars.size()) + " of " +
           count(d.ranking.total) + " kept features in ranking.tsv order, by " +
           esc(d.ranking.axis) + ".</p>";
      h += figure(bars_svg(d.ranking.bars, d.ranking.axis, !d.ranking.q_column.empty(), "feature",
                           "The leading features by the ranking criterion"),
                  esc(d.ranking.caption));
    }
    h += score_curve_html(d.score_curve) + p_values_html(d.p_values);
    h += "</section>\n";
  }
  h += top_features_html(d.top_features, classes);

  if (d.has_redundancy) {
    const ReportRedundancy& r = d.redundancy;
    h += "<section id=\"redundancy\"><h2>Redundancy</h2><p class=\"lead\">";
    if (r.dropped == 0) {
      h += "No feature was dropped as redundant: no candidate had |r| above " + esc(g(r.max_corr)) +
           " with a feature already kept.</p>";
    } else {
      h += count(r.dropped) +
           " features were dropped because |r| with a feature already kept was above " +
           esc(g(r.max_corr)) + "; " + count(r.standing) +
           " kept features stand in for them. The largest groups (kept feature: how many it stands "
           "in for):</p>";
      h += figure(bars_svg(r.largest, "dropped features it stands in for", false, "group",
                           "How many redundant features each kept feature stands in for"),
                  "Hover a bar for the names of the features it stands in for; selection-log.tsv "
                  "lists every one "
                  "with its |r|.");
    }
    h += "</section>\n";
  }

  if (!d.components.ratio.empty()) {
    h += "<section id=\"components\"><h2>Principal components</h2><p class=\"lead\">Share of the "
         "variance of " +
         esc(d.components.source) +
         " carried by each component (bars) and by the first ones together (line).</p>";
    if (d.chosen_with_labels && d.components.of_kept)
      h += "<p class=\"caution\">These features were selected using the labels" +
           (si.label_name.empty() ? std::string() : " (" + esc(si.label_name) + ")") +
           ", so the classes are expected to separate on these components, and on the sample "
           "plots below, even in data without real differences: the separation is not evidence "
           "by itself. To test it, select on training samples only and apply the plan to "
           "held-out ones.</p>";
    h += figure(scree_svg(d.components), "");
    h += "</section>\n";
  }

  if (!si.ids.empty()) {
    h += "<section id=\"samples\"><h2>Samples</h2>";
    const auto& sc = d.components.scores;
    const auto& rows = d.components.sample_of;
    if (sc.size() >= 2 &&
        (rows.empty() ? sc[0].size() == si.ids.size() : sc[0].size() == rows.size())) {
      // With --mark-by, every plot is drawn twice, side by side: by class and by the mark column.
      const bool marked = !si.marks.empty() && si.marks.size() == si.ids.size();
      std::string mark_note;
      const Classes marks = marked ? marks_of(si, mark_note) : Classes{};
      h += "<p class=\"lead\">Each dot is a sample on the components above, coloured by class" +
           std::string(marked ? " (left) and by " + esc(si.mark_name) + " (right)" : "") +
           std::string(si.screened ? "; a black ring marks a sample flagged as an outlier" : "") +
           ". Hover a dot for its id.</p>";
      h += "<div class=\"pair\">";
      const auto axis_name = [&](std::size_t k) {
        return "PC" + std::to_string(k + 1) + " score (" + percent(d.components.ratio[k]) +
               " of variance)";
      };
      const auto legend = [&](const Classes& c, bool rings, const std::string& heading) {
        std::string l = "<ul class=\"legend\">";
        if (!heading.empty()) l += "<li><strong>" + esc(heading) + ":</strong></li>";
        for (std::size_t k = 0; k < c.names.size(); ++k)
          l += "<li>" + swatch(c.colours[k].c_str(), Mark::kDot) + " " + esc(c.names[k]) + " (" +
               count(c.counts[k]) + ")</li>";
        if (rings) l += "<li>" + swatch(kInk, Mark::kRing) + " flagged outlier</li>";
        return l + "</ul>";
      };
      for (std::size_t k = 1; k < sc.size() && k < 3; ++k) {
        const std::string aria = "Samples on PC1 and PC" + std::to_string(k + 1);
        h += figure(scatter_svg(sc[0], sc[k], rows, si, classes, axis_name(0), axis_name(k), aria),
                    "");
        if (marked)
          h += figure(scatter_svg(sc[0], sc[k], rows, si, marks, axis_name(0), axis_name(k),
                                  aria + " by " + si.mark_name),
                      "");
      }
      if (marked) {
        h += "<div>" + legend(classes, si.screened, si.labels.empty() ? "" : si.label_name) +
             "</div><div>" + legend(marks, si.screened, si.mark_name) +
             (mark_note.empty() ? "" : "<p class=\"none\">" + esc(mark_note) + "</p>") + "</div>";
        h += "</div>";
      } else {
        h += "</div>" + legend(classes, si.screened, "");
      }
      if (classes.names.size() - (classes.has_missing ? 1 : 0) > kClassColourCount)
        h += "<p class=\"none\">Classes past the eighth are drawn grey.</p>";
      if (!d.components.note.empty()) h += "<p class=\"none\">" + esc(d.components.note) + "</p>";
    }
    if (si.screened) {
      ReportHistogram dist;
      dist.id = "distance";
      dist.title = "Robust distance of each sample";
      dist.axis = "robust distance on the screening components (robust standard deviations)";
      dist.count_axis = "samples";
      dist.values = si.distance;
      dist.dropped = si.flagged;
      dist.cuts = {{si.threshold, "outlier threshold " + g(si.threshold)}};
      dist.cut_keeps_equal_above = false;
      dist.lo = 0;
      double far = si.threshold;
      for (const double v : si.distance)
        if (std::isfinite(v)) far = std::max(far, v);
      dist.hi = far * 1.06;
      dist.dropped_label = "flagged";
      dist.kept_label = "not flagged";
      std::string extra;
      h += "<h3 id=\"distance\">" + esc(dist.title) + "</h3>";
      h += figure(histogram_svg(dist, extra),
                  "Screen: " + esc(si.screen_source) +
                      ". Each component's scores are centred on their median (with "
                      "labels, the median of the sample's class, so classes that separate are not "
                      "outliers) and divided "
                      "by a robust standard deviation: the larger of 1.4826 \xC3\x97 the median "
                      "absolute deviation and "
                      "the 80th percentile of the absolute deviations / 1.2816 (so a batch or "
                      "group of more than a fifth "
                      "of the samples is not called outlying). The distance is the square root of "
                      "the sum of squares. "
                      "Rule: " +
                      esc(si.rule) + ".");
      h += "<p>";
      if (flagged_names.empty()) {
        h += "No sample is flagged.";
      } else {
        h += "<strong>Flagged (" + count(static_cast<std::int64_t>(flagged_names.size())) +
             "):</strong> " + name_list(flagged_names, 50) + ". ";
        h += dropped_names.empty()
                 ? "They were kept; --drop-outliers removes flagged samples before the reduction."
                 : "They were removed before the reduction (--drop-outliers).";
      }
      h += " samples.tsv lists every sample with its missing rate, distance and flag.</p>";
    } else {
      h += "<p class=\"none\">Samples were not screened for outliers: " + esc(si.rule) + ".</p>";
    }
    if (!si.missing_rate.empty()) {
      ReportHistogram miss;
      miss.id = "sample-missing";
      miss.title = "Missing values per sample";
      miss.axis = "missing rate (fraction of the input features without a value)";
      miss.count_axis = "samples";
      miss.values = si.missing_rate;
      miss.lo = 0;
      std::string extra;
      h += "<h3 id=\"sample-missing\">" + esc(miss.title) + "</h3>" +
           figure(histogram_svg(miss, extra), "");
    }
    h += "</section>\n";
  }

  // The run record.
  const ReportRecord& rec = d.record;
  h += "<section id=\"record\" class=\"record\"><h2>Run record</h2>";
  if (!rec.command_line.empty()) {
    std::string cmd;
    for (std::size_t i = 0; i < rec.command_line.size(); ++i)
      cmd += (i ? " " : "") + shell_quote(rec.command_line[i]);
    h += "<h3>Command line</h3><pre class=\"cmd\"><code>" + esc(cmd) + "</code></pre>";
  }
  if (!rec.inputs.empty()) {
    h += "<h3>Inputs</h3><table><tr><th>input</th><th>path</th><th>SHA-256</th></tr>";
    for (const auto& in : rec.inputs)
      h += "<tr><td>" + esc(in.role) + "</td><td><code>" + esc(in.path) + "</code></td><td><code>" +
           esc(in.sha256) + "</code></td></tr>";
    h += "</table>";
  }
  if (!rec.parameters.empty()) {
    // Two tables side by side: the list is long and each row short.
    const std::size_t half = (rec.parameters.size() + 1) / 2;
    h += "<h3>Parameters</h3><div class=\"pair\">";
    for (std::size_t part = 0; part < 2; ++part) {
      h += "<table><tr><th>parameter</th><th>value</th></tr>";
      for (std::size_t i = part * half; i < rec.parameters.size() && i < (part + 1) * half; ++i)
        h += "<tr><td>" + esc(rec.parameters[i].first) + "</td><td><code>" +
             esc(rec.parameters[i].second) + "</code></td></tr>";
      h += "</table>";
    }
    h += "</div>";
  }
  if (!rec.timings.empty()) {
    double total = 0;
    h += "<h3>Timings</h3><table><tr><th>step</th><th>seconds</th></tr>";
    for (const auto& [k, v] : rec.timings) {
      h += "<tr><td>" + esc(k) + "</td><td class=\"n\">" + esc(g(v, 3)) + "</td></tr>";
      total += v;
    }
    h += "<tr><th>total</th><td class=\"n\">" + esc(g(total, 3)) + "</td></tr></table>";
  }
  if (!rec.outputs.empty()) {
    h += "<h3>Outputs</h3><p>";
    for (std::size_t i = 0; i < rec.outputs.size(); ++i)
      h += (i ? ", " : "") + ("<code>" + esc(rec.outputs[i]) + "</code>");
    h += "</p>";
  }
  h += "</section>\n<footer>Written by pare " + esc(rec.version) +
       ". Self-contained: no script, nothing fetched. Selected features are statistical "
       "associations in these "
       "data, not validated biomarkers.</footer>\n</body>\n</html>\n";
  return h;
}

// ---- builders
// -----------------------------------------------------------------------------------------

namespace internal::html {

const char* criterion_column(Criterion c) {
  switch (c) {
    case Criterion::kMi:
      return "mi";
    case Criterion::kChi2:
      return "chi2";
    case Criterion::kChi2Counts:
      return "chi2_counts";
    case Criterion::kF:
      return "f";
    case Criterion::kVariance:
      break;
  }
  return "variance";
}

const char* criterion_q_column(Criterion c) {
  switch (c) {
    case Criterion::kMi:
    case Criterion::kChi2:
      return "chi2_q";
    case Criterion::kChi2Counts:
      return "chi2_counts_q";
    case Criterion::kF:
      return "f_q";
    case Criterion::kVariance:
      break;
  }
  return "";
}

const char* criterion_axis(Criterion c) {
  switch (c) {
    case Criterion::kMi:
      return "mutual information with the class (nats)";
    case Criterion::kChi2:
      return "chi-square statistic of bins \xC3\x97 classes";
    case Criterion::kChi2Counts:
      return "counts chi-square statistic";
    case Criterion::kF:
      return "one-way ANOVA F statistic";
    case Criterion::kVariance:
      break;
  }
  return "sample variance";
}

}  // namespace internal::html

void add_reduction(ReportData& d, const FeatureTable& t, const Reduction& r, const ReduceOptions& o,
                   bool selection) {
  for (const auto& st : r.steps) d.steps.push_back({st.name, st.in, st.out, st.seconds});
  const std::size_t p = r.decisions.size();

  ReportHistogram miss;
  miss.id = "missing";
  miss.title = "Missing rate of every input feature";
  miss.axis = "missing rate (fraction of samples without a value)";
  miss.lo = 0;
  miss.hi = 1;
  miss.bin_width = 0.02;
  miss.cut_keeps_equal_above = false;
  miss.values.reserve(p);
  for (std::size_t j = 0; j < p; ++j) miss.values.push_back(r.raw_stats[j].missing_rate());
  std::int64_t miss_dropped = 0;
  if (selection && o.missing_filter) {
    miss.dropped.resize(p);
    for (std::size_t j = 0; j < p; ++j)
      miss_dropped += miss.dropped[j] = !r.decisions[j].kept && r.decisions[j].step == "missing";
    miss.cuts.push_back({o.drop_missing_above, "drop missing above " + g(o.drop_missing_above)});
    miss.caption = "All " + count(static_cast<std::int64_t>(p)) +
                   " input features. The missing filter drops a feature "
                   "missing in more than " +
                   percent(o.drop_missing_above, 0) + " of the samples: " + count(miss_dropped) +
                   " dropped.";
  } else {
    miss.caption = "All " + count(static_cast<std::int64_t>(p)) +
                   " input features; no missing filter ran (gaps are "
                   "filled with the feature's " +
                   impute_name(o.impute) + ").";
  }
  d.histograms.push_back(std::move(miss));

  ReportHistogram var;
  var.id = "variance";
  var.title = "Variance of the features that reached the variance filter";
  var.axis = std::string("sample variance, log scale (") +
             (o.log2 ? "of log2(x + 1) values" : "squared units of the data") + ")";
  var.log_x = true;
  var.cut_keeps_equal_above = true;
  std::vector<std::size_t> reached;
  for (std::size_t j = 0; j < p; ++j)
    if (!(r.decisions[j].step == "missing" && !r.decisions[j].kept)) reached.push_back(j);
  std::int64_t var_dropped = 0;
  double boundary = kNaN;
  for (const std::size_t j : reached) var.values.push_back(r.variance[j]);
  if (selection && o.variance_filter) {
    for (const std::size_t j : reached) {
      const bool gone = !r.decisions[j].kept && r.decisions[j].step == "variance";
      var.dropped.push_back(gone);
      var_dropped += gone;
      if (gone && r.variance[j] >= o.min_variance &&
          (std::isnan(boundary) || r.variance[j] > boundary))
        boundary = r.variance[j];
    }
    if (o.min_variance > 0)
      var.cuts.push_back({o.min_variance, "min variance " + g(o.min_variance)});
    if (o.drop_low_variance > 0 && !std::isnan(boundary))
      var.cuts.push_back(
          {boundary, "lowest " + g(100 * o.drop_low_variance) + "% (up to " + g(boundary) + ")"});
    var.caption = count(static_cast<std::int64_t>(reached.size())) +
                  " features, variance of their observed values "
                  "(ddof 1). " +
                  count(var_dropped) + " dropped. Variance 0 (constant) is drawn at 0.";
  } else {
    var.caption = count(static_cast<std::int64_t>(reached.size())) +
                  " features, variance of their observed values "
                  "(ddof 1); no variance filter ran. Variance 0 (constant) is drawn at 0.";
  }
  d.histograms.push_back(std::move(var));

  if (!selection) return;
  // The leading features (as ranking.tsv writes them), the score curve and the p-values.
  if (r.supervised && o.relevance) {
    const std::vector<std::size_t> order = rank_order(r.scores, r.criterion);
    std::vector<std::size_t> kept;
    kept.reserve(r.kept.size());
    for (const std::int64_t j : r.kept)
      kept.push_back(static_cast<std::size_t>(r.score_of[static_cast<std::size_t>(j)]));
    add_ranking(d, t, r.scores, order, kept, r.criterion, o.fdr, o.keep);
    d.chosen_with_labels = r.criterion != Criterion::kVariance;
  } else {
    d.ranking.criterion = criterion_name(r.criterion);
    d.ranking.column = criterion_column(r.criterion);
    d.ranking.axis = criterion_axis(r.criterion);
    d.ranking.total = static_cast<std::int64_t>(r.kept.size());
    if (!o.relevance) {
      d.ranking_note = "No ranking ran: the kept features are in input order.";
    } else {
      for (std::size_t k = 0; k < r.kept.size() && k < 30; ++k) {
        const auto j = static_cast<std::size_t>(r.kept[k]);
        ReportBar b;
        b.name = t.feature_names[j];
        b.value = r.variance[j];
        b.raw_value = shortest(b.value);
        d.ranking.bars.push_back(std::move(b));
      }
      d.ranking.caption = "Ranked by variance (no labels given).";
      // The curve: every feature that reached the ranking, by variance (ties in input order, as
      // reduce orders them).
      std::vector<std::int64_t> ranked;
      for (std::size_t j = 0; j < p; ++j) {
        const Decision& dec = r.decisions[j];
        if (dec.kept || (dec.step != "missing" && dec.step != "variance"))
          ranked.push_back(static_cast<std::int64_t>(j));
      }
      std::stable_sort(ranked.begin(), ranked.end(), [&](std::int64_t a, std::int64_t b) {
        return r.variance[static_cast<std::size_t>(a)] > r.variance[static_cast<std::size_t>(b)];
      });
      std::vector<std::int64_t> rank_of(p, 0);
      std::vector<double> values;
      values.reserve(ranked.size());
      for (std::size_t k = 0; k < ranked.size(); ++k) {
        rank_of[static_cast<std::size_t>(ranked[k])] = static_cast<std::int64_t>(k + 1);
        values.push_back(r.variance[static_cast<std::size_t>(ranked[k])]);
      }
      std::vector<std::int64_t> kept_ranks;
      for (const std::int64_t j : r.kept)
        kept_ranks.push_back(rank_of[static_cast<std::size_t>(j)]);
      set_score_curve(d.score_curve, std::move(values), {}, std::move(kept_ranks), 1, o.keep);
      d.score_curve.column = "variance";
      d.score_curve.axis = criterion_axis(Criterion::kVariance);
    }
  }

  // Redundancy groups: each kept feature and the dropped features that named it as their twin.
  if (o.prune) {
    d.has_redundancy = true;
    d.redundancy.max_corr = o.max_corr;
    std::map<std::int64_t, std::vector<std::int64_t>> groups;
    for (std::size_t j = 0; j < p; ++j) {
      const Decision& dec = r.decisions[j];
      if (!dec.kept && dec.step == "redundancy") {
        ++d.redundancy.dropped;
        groups[dec.partner].push_back(static_cast<std::int64_t>(j));
      }
    }
    d.redundancy.standing = static_cast<std::int64_t>(groups.size());
    std::vector<std::pair<std::int64_t, const std::vector<std::int64_t>*>> order;
    for (const auto& [kept, members] : groups) order.emplace_back(kept, &members);
    // Largest groups first; among equal ones the better-ranked kept feature first.
    std::stable_sort(order.begin(), order.end(), [&](const auto& a, const auto& b) {
      if (a.second->size() != b.second->size()) return a.second->size() > b.second->size();
      return r.decisions[static_cast<std::size_t>(a.first)].rank <
             r.decisions[static_cast<std::size_t>(b.first)].rank;
    });
    for (std::size_t k = 0; k < order.size() && k < 15; ++k) {
      ReportBar b;
      b.name = t.feature_names[static_cast<std::size_t>(order[k].first)];
      b.value = static_cast<double>(order[k].second->size());
      b.raw_value = std::to_string(order[k].second->size());
      std::string names;
      for (std::size_t i = 0; i < order[k].second->size() && i < 12; ++i)
        names += (i ? ", " : "") + t.feature_names[static_cast<std::size_t>((*order[k].second)[i])];
      if (order[k].second->size() > 12) names += ", ...";
      b.hover = "stands in for " + names;
      d.redundancy.largest.push_back(std::move(b));
    }
  }
}

void add_components(ReportData& d, const Projection& pr, const std::string& source) {
  d.components = {};
  d.components.source = source;
  d.components.of_kept = true;
  for (Eigen::Index k = 0; k < pr.ratio.size(); ++k) {
    d.components.ratio.push_back(pr.ratio(k));
    d.components.cumulative.push_back(pr.cumulative(k));
  }
  for (Eigen::Index k = 0; k < pr.scores.cols() && k < 3; ++k) {
    std::vector<double> v(static_cast<std::size_t>(pr.scores.rows()));
    for (Eigen::Index i = 0; i < pr.scores.rows(); ++i)
      v[static_cast<std::size_t>(i)] = pr.scores(i, k);
    d.components.scores.push_back(std::move(v));
  }
}

void add_screen(ReportData& d, const SampleScreen& s, const std::vector<std::string>& ids,
                const std::vector<std::string>& labels, const std::string& label_name,
                const std::vector<char>& dropped) {
  ReportSamples& r = d.sample_info;
  r.ids = ids;
  r.labels = labels;
  r.label_name = label_name;
  r.missing_rate.clear();
  for (std::size_t i = 0; i < ids.size(); ++i) r.missing_rate.push_back(s.missing_rate(i));
  r.screened = s.done;
  r.rule = screen_rule(s);
  r.dropped = dropped;
  if (!s.done) return;
  r.distance = s.robust.distance;
  r.flagged = s.robust.flagged;
  r.threshold = s.robust.threshold;
  r.screen_source = "a PCA of the " + count(static_cast<std::int64_t>(s.features.size())) +
                    " most variable of the " + count(s.n_eligible) +
                    " input features with at most " + percent(s.options.max_missing, 0) +
                    " missing" + (s.options.log2 ? ", on log2(x + 1)," : "") +
                    " mean-filled and standardised; distance on its first " +
                    std::to_string(s.scores.cols()) + " components";
  // Without components of its own the run shows the screen's.
  if (d.components.ratio.empty()) {
    d.components = {};
    d.components.source = "the screening PCA (" +
                          count(static_cast<std::int64_t>(s.features.size())) +
                          " most variable input features, standardised)";
    double cum = 0;
    for (Eigen::Index k = 0; k < s.ratio.size(); ++k) {
      cum += s.ratio(k);
      d.components.ratio.push_back(s.ratio(k));
      d.components.cumulative.push_back(cum);
    }
    for (Eigen::Index k = 0; k < s.scores.cols(); ++k) {
      std::vector<double> v(static_cast<std::size_t>(s.scores.rows()));
      for (Eigen::Index i = 0; i < s.scores.rows(); ++i)
        v[static_cast<std::size_t>(i)] = s.scores(i, k);
      d.components.scores.push_back(std::move(v));
    }
  }
}

void add_profile(ReportData& d, const FeatureTable& t, const Profile& pf) {
  const std::size_t p = pf.features.size();
  ReportHistogram miss;
  miss.id = "missing";
  miss.title = "Missing rate of every feature";
  miss.axis = "missing rate (fraction of samples without a value)";
  miss.lo = 0;
  miss.hi = 1;
  miss.bin_width = 0.02;
  miss.cut_keeps_equal_above = false;
  miss.dropped_label = "flagged mostly missing";
  miss.kept_label = "others";
  std::int64_t flagged = 0;
  for (std::size_t j = 0; j < p; ++j) {
    miss.values.push_back(pf.features[j].missing_rate());
    const bool f = (pf.flags[j] & kFlagMostlyMissing) != 0;
    miss.dropped.push_back(f);
    flagged += f;
  }
  miss.cuts.push_back(
      {pf.options.mostly_missing, "mostly missing above " + g(pf.options.mostly_missing)});
  miss.caption = "All " + count(static_cast<std::int64_t>(p)) + " features of " + t.source + "; " +
                 count(flagged) + " flagged mostly missing (scan flags, removes nothing).";
  d.histograms.push_back(std::move(miss));

  ReportHistogram var;
  var.id = "variance";
  var.title = "Variance of every feature";
  var.axis = "sample variance, log scale (squared units of the data)";
  var.log_x = true;
  var.dropped_label = "flagged constant or near-constant";
  var.kept_label = "others";
  std::int64_t flat = 0;
  for (std::size_t j = 0; j < p; ++j) {
    var.values.push_back(pf.features[j].variance);
    const bool f = (pf.flags[j] & (kFlagConstant | kFlagNearConstant)) != 0;
    var.dropped.push_back(f);
    flat += f;
  }
  var.caption = "Variance of the observed values (ddof 1); " + count(flat) +
                " flagged constant or near-constant (sd < " + g(pf.options.near_constant_cv) +
                " \xC3\x97 |mean|). Variance 0 is drawn at 0.";
  d.histograms.push_back(std::move(var));
}

void add_plan_record(ReportData& d, const std::string& plan_text) {
  internal::add_plan_record(d, nlohmann::json::parse(plan_text));
}

void internal::add_plan_record(ReportData& d, const nlohmann::json& plan) {
  ReportRecord& r = d.record;
  r.version = plan.value("pare_version", std::string(PARE_VERSION));
  if (plan.contains("command_line"))
    r.command_line = plan["command_line"].get<std::vector<std::string>>();
  const auto value_text = [](const nlohmann::json& v) {
    return v.is_string() ? v.get<std::string>() : v.dump();
  };
  if (plan.contains("input")) {
    const auto& in = plan["input"];
    r.inputs.push_back(
        {"data", in.value("path", std::string()), in.value("sha256", std::string())});
    if (in.contains("sample_sheet")) {
      const auto& sh = in["sample_sheet"];
      r.inputs.push_back({"sample sheet (" + sh.value("column", std::string()) + ")",
                          sh.value("path", std::string()), sh.value("sha256", std::string())});
    }
  }
  if (plan.contains("seed")) r.parameters.emplace_back("seed", value_text(plan["seed"]));
  if (plan.contains("read"))
    for (const auto& [k, v] : plan["read"].items())
      r.parameters.emplace_back("read." + k, value_text(v));
  if (plan.contains("parameters"))
    for (const auto& [k, v] : plan["parameters"].items())
      r.parameters.emplace_back(k, value_text(v));
  if (plan.contains("projection"))
    for (const char* key :
         {"components", "center", "scale", "method", "precision", "iterations", "residual"})
      if (plan["projection"].contains(key))
        r.parameters.emplace_back(std::string("projection.") + key,
                                  value_text(plan["projection"][key]));
  if (plan.contains("steps"))
    for (const auto& st : plan["steps"])
      r.timings.emplace_back(st.value("step", std::string()), st.value("seconds", 0.0));
  if (plan.contains("outputs"))
    for (const auto& [k, v] : plan["outputs"].items()) r.outputs.push_back(value_text(v));
}

}  // namespace pare
