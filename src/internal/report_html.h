// The drawing helpers of report.html shared by its sources: src/report_text.cpp (formatting),
// src/report_charts.cpp (the funnel, the filter histograms, the bars, the components and samples),
// src/report_page.cpp (the page), src/report_data.cpp (the builders) and src/report_plots.cpp (the
// score curve, the p-value histogram, the strip plots of the top features or their scatter plots
// against a continuous target, the samples coloured by a sheet column).
#pragma once

#include <cstddef>      // std::size_t
#include <cstdint>      // std::int64_t
#include <limits>       // std::numeric_limits
#include <span>         // std::span
#include <string>       // std::string
#include <string_view>  // std::string_view
#include <vector>       // std::vector

#include "pare/ranking.h"
#include "pare/report.h"

namespace pare::internal::html {

// ---- palette
// The eight colours of Okabe & Ito (2008, "Color Universal Design", recalled), told apart under
// the common forms of colour blindness. Kept/passed is blue, dropped/removed vermillion.
inline constexpr const char* kBlue = "#0072B2";
inline constexpr const char* kVermillion = "#D55E00";
inline constexpr const char* kOrange = "#E69F00";
inline constexpr const char* kGreen = "#009E73";
inline constexpr const char* kInk = "#1a1a1a";
inline constexpr const char* kAxis = "#8c8c8c";
inline constexpr const char* kPale = "#cfe3f1";     // "features in" behind the blue "features out"
inline constexpr const char* kOther = "#999999";    // classes past the eighth, "other" values
inline constexpr const char* kMissing = "#d4d4d4";  // a sample without a value (light grey)
inline constexpr const char* kClassColours[] = {"#0072B2", "#E69F00", "#009E73", "#CC79A7",
                                                "#56B4E9", "#D55E00", "#F0E442", "#000000"};
inline constexpr std::size_t kClassColourCount = 8;
// A continuous target: a sequential ramp of one hue, light (low) to dark (high), which stays
// ordered under every form of colour blindness because only lightness changes. The stops are
// entries 3-9 of ColorBrewer's 9-class "Blues" (Harrower & Brewer 2003, recalled).
inline constexpr const char* kRampStops[] = {"#C6DBEF", "#9ECAE1", "#6BAED6", "#4292C6",
                                             "#2171B5", "#08519C", "#08306B"};
inline constexpr std::size_t kRampStopCount = 7;

inline constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// ---- text
/// Valid UTF-8 without controls or non-characters (they become U+FFFD).
std::string clean(std::string_view s);
/// HTML-escaped text, also safe inside a quoted attribute.
std::string esc(std::string_view raw);
/// Escaped and cut to `max` code points (an ellipsis marks the cut).
std::string esc_short(std::string_view raw, std::size_t max);
/// 12345678 -> "12,345,678".
std::string count(std::int64_t v);
/// `digits` significant digits as printf's %g writes them.
std::string g(double v, int digits = 3);
std::string percent(double fraction, int decimals = 1);
/// An SVG coordinate with one decimal.
std::string xy(double v);
/// The shortest text that reads back as exactly `v` (as the output files write it).
std::string shortest(double v);
std::string shortest(float v);
/// 10 with a superscript exponent, e.g. 10⁻⁸.
std::string power_of_ten(int e);
/// The word as a POSIX shell reads it back: unchanged when safe, else in single quotes.
std::string shell_quote(const std::string& word);

// ---- axes and shapes
/// A step of 1, 2 or 5 times a power of ten near range / target.
double nice_step(double range, int target);
std::vector<double> linear_ticks(double lo, double hi, int target, bool integers = false);

/// Maps a data value to a pixel: domain [d0, d1] (log10 units when log) onto [r0, r1].
struct Scale {
  double d0 = 0, d1 = 1, r0 = 0, r1 = 1;
  bool log = false;
  double operator()(double v) const;
  double raw(double t) const { return r0 + (t - d0) / (d1 - d0) * (r1 - r0); }
};

void line(std::string& s, double x1, double y1, double x2, double y2, const char* stroke,
          double width = 1, const char* dash = nullptr);
void text(std::string& s, double x, double y, const std::string& escaped,
          const char* anchor = "start", const char* cls = nullptr, const char* extra = nullptr);
void rect(std::string& s, double x, double y, double w, double h, const char* fill,
          const std::string& title = {});
std::string svg_open(double width, double height, const std::string& label);
/// A horizontal value axis along y = `y` from the scale's r0 to r1, with ticks and a label.
void x_axis(std::string& s, const Scale& x, double y, const std::vector<double>& ticks,
            const std::vector<std::string>& labels, const std::string& label, double label_y);
/// Ticks of a log10 count axis from 1 to 10^top.
void log_count_axis(std::string& s, const Scale& y, double x, int top, double grid_to,
                    const std::string& label, double mid_y);

/// Features into and out of every step, one row per step.
std::string funnel_svg(const std::vector<ReportStep>& steps);
/// A histogram with a logarithmic count axis; `caption_extra` receives a note on values left out.
std::string histogram_svg(const ReportHistogram& h, std::string& caption_extra);
/// Horizontal bars with names on the left and the value printed at the end; optional q column.
std::string bars_svg(const std::vector<ReportBar>& bars, const std::string& axis, bool show_q,
                     const char* cls, const std::string& aria);
/// The variance ratio of every component, with the cumulative share.
std::string scree_svg(const ReportComponents& c);

// ---- groups of samples
/// The groups a scatter or strip plot colours by: names (as the legend shows them), sizes, a
/// colour each, and the group of every sample.
struct Classes {
  std::vector<std::string> names;
  std::vector<std::int64_t> counts;
  std::vector<std::string> colours;
  std::vector<std::size_t> of;  // per sample
  bool has_missing = false;     // the last group is the samples without a value
  // A continuous target: every sample its own colour on the ramp (empty: by group), and the
  // target's range the ramp spans.
  std::vector<std::string> sample_colours;
  double lo = kNaN, hi = kNaN;
  bool ramp() const { return !sample_colours.empty(); }
};

/// Groups by class label, sorted by name (as the rest of pare orders classes); samples without a
/// label ("") form a last group, "no label", drawn light grey. With a continuous target: one group
/// of the samples with a value, each coloured on the ramp (ramp_colour over the target's range),
/// and a last group, "no value", light grey.
Classes classes_of(const ReportSamples& d);
const char* colour_of(std::size_t k);
/// The ramp's colour at `t` in [0, 1] (clamped; NaN: the middle), interpolated linearly in sRGB
/// between kRampStops, as #RRGGBB.
std::string ramp_colour(double t);
/// The ramp drawn as a small legend swatch: its stops side by side, light to dark.
std::string ramp_swatch();

/// The samples on two components, coloured by `classes`, flagged ones ringed, the id on hover
/// (and the label or the target's value).
std::string scatter_svg(const std::vector<double>& xs, const std::vector<double>& ys,
                        const std::vector<std::size_t>& sample_of, const ReportSamples& d,
                        const Classes& classes, const std::string& x_label,
                        const std::string& y_label, const std::string& aria);

// ---- page pieces
enum class Mark { kBox, kDot, kRing, kLine };
std::string swatch(const char* colour, Mark mark = Mark::kBox);
std::string figure(const std::string& svg, const std::string& caption);
std::string name_list(const std::vector<std::string>& names, std::size_t max);

// ---- ranking words
// (`continuous`: against a continuous target; mi and variance differ by the kind of target.)
const char* criterion_column(Criterion c, bool continuous = false);
const char* criterion_q_column(Criterion c, bool continuous = false);
const char* criterion_axis(Criterion c, bool continuous = false);

// ---- the parts filled and drawn by src/report_plots.cpp
/// Fills `curve` from the scores of every ranked feature in ranking order, their q-values in the
/// same order (empty: no --fdr cut), the 1-based ranks of the kept features in kept order, and
/// the cuts asked for (fdr 1: none; keep 0: none).
void set_score_curve(ReportScoreCurve& curve, std::vector<double> values, std::span<const double> q,
                     std::vector<std::int64_t> kept_ranks, double fdr, std::int64_t keep);
/// The score-against-rank figure with its cuts, or "" when the curve is empty.
std::string score_curve_html(const ReportScoreCurve& curve);
/// The p-value histogram figure, or "" when there are no p-values.
std::string p_values_html(const ReportHistogram& p_values);
/// The strip plots section, or "" when there are none. Class colours follow `classes` (the
/// scatter plots' groups) where a class is in both. With top.target, one scatter plot per feature
/// against the target instead, its Pearson r and Spearman rho taken from the bar of `ranking`
/// of the same name where there is one.
std::string top_features_html(const ReportTopFeatures& top, const Classes& classes,
                              const ReportRanking& ranking);
/// Groups by the mark column: every value its colour when there are at most 8, else the 7 most
/// frequent and "other"; samples without a value form a last group, "missing". `note` receives a
/// sentence when values were merged into "other".
Classes marks_of(const ReportSamples& d, std::string& note);

}  // namespace pare::internal::html
