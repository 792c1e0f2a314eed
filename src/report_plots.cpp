// report.html, the parts that help choose and judge a selection: the score of every ranked
// feature against its rank (with the --fdr and --keep cuts), the ranking test's p-values, strip
// plots of the leading kept features by class (or scatter plots against a continuous target), and
// the samples coloured by a sheet column (--mark-by). The page itself is assembled in
// src/report_page.cpp.
#include <algorithm>  // std::sort, std::stable_sort, std::min, std::max
#include <cmath>      // std::isfinite, std::log10, std::floor, std::ceil, std::pow
#include <cstdint>    // std::int64_t, std::uint64_t
#include <map>        // std::map
#include <stdexcept>  // std::out_of_range
#include <string>     // std::string
#include <utility>    // std::pair
#include <vector>     // std::vector

#include "pare/report.h"

#include "internal/criterion_facts.h"
#include "internal/report_html.h"

namespace pare {

namespace internal::html {

namespace {

// The p-values of the test a criterion's q-values come from (nullptr: none, e.g. variance): mi
// takes the chi-square test's against classes and Spearman's against a continuous target.
const std::vector<double>* criterion_p(const FeatureScores& s, Criterion c) {
  switch (c) {
    case Criterion::kMi:
      return s.continuous ? &s.spearman_p : &s.chi2_p;
    case Criterion::kChi2:
      return &s.chi2_p;
    case Criterion::kF:
      return &s.f_p;
    case Criterion::kChi2Counts:
      return &s.chi2_counts_p;
    case Criterion::kPearson:
      return &s.pearson_p;
    case Criterion::kSpearman:
      return &s.spearman_p;
    case Criterion::kVariance:
      break;
  }
  return nullptr;
}

const char* criterion_p_column(Criterion c, bool continuous) {
  return criterion_facts(c, continuous).p_column;
}
const char* criterion_test(Criterion c, bool continuous) {
  return criterion_facts(c, continuous).test;
}

// A fixed offset in [-0.5, 0.5) for sample i: the finaliser of SplitMix64 (Steele, Lea & Flood,
// "Fast splittable pseudorandom number generators", OOPSLA 2014), a bijection that scatters
// consecutive integers. No generator state: the same sample sits at the same offset in every
// strip plot and in every run.
double jitter(std::size_t i) {
  std::uint64_t z = static_cast<std::uint64_t>(i) + 0x9E3779B97F4A7C15ull;
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
  z ^= z >> 31;
  return static_cast<double>(z >> 11) * 0x1.0p-53 - 0.5;
}

// The q-th quantile (0 <= q <= 1) of sorted values by linear interpolation between order
// statistics (Hyndman & Fan 1996, definition 7, the default of numpy.quantile and R's quantile).
double quantile(const std::vector<double>& sorted, double q) {
  if (sorted.empty()) return kNaN;
  const double h = q * static_cast<double>(sorted.size() - 1);
  const auto lo = static_cast<std::size_t>(std::floor(h));
  const std::size_t hi = std::min(lo + 1, sorted.size() - 1);
  return sorted[lo] + (h - static_cast<double>(lo)) * (sorted[hi] - sorted[lo]);
}

// Ticks of a log10 axis over [a0, a1] (log10 units): powers of ten, with 2 and 5 between them
// when the axis spans fewer than three decades.
std::vector<double> log_ticks(double a0, double a1) {
  std::vector<double> ticks;
  const bool fine = a1 - a0 < 3;
  for (int e = static_cast<int>(std::floor(a0)); e <= static_cast<int>(std::ceil(a1)); ++e)
    for (const double m : {1.0, 2.0, 5.0}) {
      if (m != 1.0 && !fine) continue;
      const double t = e + std::log10(m);
      if (t >= a0 - 1e-9 && t <= a1 + 1e-9) ticks.push_back(t);
    }
  return ticks;
}

// The palette for a mark column starts three colours on from the classes' (at pink), so the
// plots coloured by class and by the mark column do not look alike where a value and a class
// share a place in their order.
const char* mark_colour(std::size_t k) {
  return k < kClassColourCount ? kClassColours[(k + 3) % kClassColourCount] : kOther;
}

std::string tick_value(double log_t) {
  const double v = std::pow(10.0, log_t);
  if (v >= 1 && v < 1e7 && std::abs(v - std::round(v)) < 1e-6 * v)
    return count(static_cast<std::int64_t>(std::llround(v)));
  const double e = std::round(log_t);
  if (std::abs(log_t - e) < 1e-9) return power_of_ten(static_cast<int>(e));
  return g(v, 2);
}

// `phrase` as a sentence: first letter capitalised, a full stop at the end.
std::string sentence(std::string phrase) {
  if (!phrase.empty() && phrase[0] >= 'a' && phrase[0] <= 'z')
    phrase[0] = static_cast<char>(phrase[0] - 'a' + 'A');
  if (!phrase.empty() && phrase.back() != '.') phrase += '.';
  return phrase;
}

}  // namespace

void set_score_curve(ReportScoreCurve& c, std::vector<double> values, std::span<const double> q,
                     std::vector<std::int64_t> kept_ranks, double fdr, std::int64_t keep) {
  c.values = std::move(values);
  c.kept_ranks = std::move(kept_ranks);
  c.fdr = fdr;
  c.keep = keep;
  c.fdr_passed = 0;
  c.fdr_rank = 0;
  // The same test as the --fdr filter (a feature goes when q > Q).
  if (fdr < 1)
    for (std::size_t k = 0; k < q.size(); ++k)
      if (!(q[k] > fdr)) {
        ++c.fdr_passed;
        c.fdr_rank = static_cast<std::int64_t>(k + 1);
      }
  c.keep_rank = 0;
  if (keep > 0 && !c.kept_ranks.empty())
    c.keep_rank = c.kept_ranks[std::min(static_cast<std::size_t>(keep), c.kept_ranks.size()) - 1];
}

namespace {

// The score curve's frame: its size, its scales, and where a rank and a score land.
struct CurveFrame {
  static constexpr double width = 760, left = 74, right = 24, top = 44, plot_h = 220, bottom = 58;
  std::size_t n = 0;
  bool log_x = false, log_y = false;
  Scale x, y;
  std::int64_t infinite = 0;  // scores that are infinite (drawn at the top or the bottom)

  double px(double rank) const { return log_x ? x.raw(std::log10(rank)) : x.raw(rank); }
  double py(double v) const {
    if (std::isinf(v)) return v > 0 ? top : top + plot_h;
    return log_y ? y.raw(std::log10(v)) : y.raw(v);
  }
};

CurveFrame curve_frame(const ReportScoreCurve& c) {
  CurveFrame f;
  const double width = f.width, left = f.left, right = f.right, top = f.top, plot_h = f.plot_h;
  const std::size_t n = f.n = c.values.size();
  // Ranks on a log axis past 50 features: the few informative ones at the top of a long ranking
  // would otherwise share a pixel column.
  f.log_x = n > 50;
  const double span = std::max(1.0, std::log10(static_cast<double>(n)));
  f.x = f.log_x ? Scale{-0.02 * span, std::log10(static_cast<double>(n)) + 0.02 * span, left,
                        width - right}
                : Scale{0.5, static_cast<double>(n) + 0.5, left, width - right};
  double lo = kNaN, hi = kNaN;
  for (const double v : c.values) {
    if (std::isinf(v)) ++f.infinite;
    if (!std::isfinite(v)) continue;
    lo = std::isnan(lo) ? v : std::min(lo, v);
    hi = std::isnan(hi) ? v : std::max(hi, v);
  }
  if (std::isnan(lo)) lo = hi = 0;
  // A log score axis when the scores are positive and span more than three decades (variance).
  f.log_y = lo > 0 && hi / lo > 1e3;
  double y0 = f.log_y ? std::log10(lo) : std::min(0.0, lo);
  double y1 = f.log_y ? std::log10(hi) : hi;
  if (y1 - y0 < 1e-12) y1 = y0 + 1;
  y1 += (y1 - y0) * 0.04;
  if (f.log_y) y0 -= (y1 - y0) * 0.03;
  f.y = Scale{y0, y1, top + plot_h, top};
  return f;
}

// The score axis with its grid, and the rank axis.
void curve_axes(std::string& s, const ReportScoreCurve& c, const CurveFrame& f) {
  const double width = f.width, left = f.left, right = f.right, top = f.top, plot_h = f.plot_h;
  line(s, left, top, left, top + plot_h, kAxis);
  const std::vector<double> y_ticks =
      f.log_y ? log_ticks(f.y.d0, f.y.d1) : linear_ticks(f.y.d0, f.y.d1, 5);
  for (const double t : y_ticks) {
    const double p = f.y.raw(t);
    line(s, left - 4, p, left, p, kAxis);
    line(s, left, p, width - right, p, "#eeeeee");
    text(s, left - 7, p + 4, esc(f.log_y ? tick_value(t) : g(t, 4)), "end", "tick");
  }
  s += "<text class=\"label\" text-anchor=\"middle\" transform=\"translate(14 " +
       xy(top + plot_h / 2) + ") rotate(-90)\">" + esc(c.axis.empty() ? c.column : c.axis) +
       (f.log_y ? " (log scale)" : "") + "</text>";
  std::vector<double> ticks;
  std::vector<std::string> labels;
  if (f.log_x) {
    for (const double t : log_ticks(0, std::log10(static_cast<double>(f.n)))) {
      ticks.push_back(t);
      labels.push_back(esc(tick_value(t)));
    }
  } else {
    for (const double t : linear_ticks(1, static_cast<double>(f.n), 8, true)) {
      if (t < 1) continue;
      ticks.push_back(t);
      labels.push_back(count(static_cast<std::int64_t>(t)));
    }
  }
  for (const double t : ticks) line(s, f.x.raw(t), top, f.x.raw(t), top + plot_h, "#f3f3f3");
  x_axis(s, f.x, top + plot_h, ticks, labels,
         f.log_x ? "rank (log scale; 1 = best)" : "rank (1 = best)", top + plot_h + 42);
}

// The kept features: ticks along the bottom (one per pixel column).
void kept_rug(std::string& s, const ReportScoreCurve& c, const CurveFrame& f) {
  if (c.kept_ranks.empty()) return;
  std::string rug;
  double last = -1;
  std::vector<double> at;
  for (const std::int64_t r : c.kept_ranks)
    if (r >= 1 && r <= static_cast<std::int64_t>(f.n)) at.push_back(f.px(static_cast<double>(r)));
  std::sort(at.begin(), at.end());
  for (const double a : at) {
    if (a - last < 1) continue;
    last = a;
    rug += "M" + xy(a) + " " + xy(f.top + f.plot_h) + "v-7";
  }
  s += "<path d=\"" + rug + "\" stroke=\"" + kGreen + "\" stroke-width=\"1\" fill=\"none\"/>";
}

// The curve: scores fall with rank, so the first and the last rank that land in a pixel column
// draw everything in it. Its group carries the points drawn and the cuts, for checks.
void curve_line(std::string& s, const ReportScoreCurve& c, const CurveFrame& f) {
  const std::size_t n = f.n;
  std::string path, points;
  double column = -1e9;
  std::size_t last_added = n;
  const auto add = [&](std::size_t k) {
    if (k == last_added) return;
    last_added = k;
    const double v = c.values[k];
    path += (path.empty() ? "M" : " L") + xy(f.px(static_cast<double>(k + 1))) + " " + xy(f.py(v));
    points += (points.empty() ? "" : " ") + std::to_string(k + 1) + ":" + shortest(v);
  };
  for (std::size_t k = 0; k < n; ++k) {
    if (std::isnan(c.values[k])) continue;
    const double col = std::floor(f.px(static_cast<double>(k + 1)));
    if (col != column) {
      if (k > 0 && !std::isnan(c.values[k - 1])) add(k - 1);
      add(k);
      column = col;
    }
  }
  if (!std::isnan(c.values[n - 1])) add(n - 1);
  s += "<g class=\"score-curve\" data-column=\"" + esc(c.column) + "\" data-count=\"" +
       std::to_string(n) + "\" data-kept=\"" + std::to_string(c.kept_ranks.size()) + "\"";
  if (c.fdr < 1)
    s += " data-fdr=\"" + shortest(c.fdr) + "\" data-fdr-passed=\"" + std::to_string(c.fdr_passed) +
         "\" data-fdr-rank=\"" + std::to_string(c.fdr_rank) + "\"";
  if (c.keep > 0)
    s += " data-keep=\"" + std::to_string(c.keep) + "\" data-keep-rank=\"" +
         std::to_string(c.keep_rank) + "\"";
  if (c.absolute) s += " data-absolute=\"true\"";
  s += " data-points=\"" + points + "\"><path d=\"" + path + "\" fill=\"none\" stroke=\"" + kBlue +
       "\" stroke-width=\"2\" stroke-linejoin=\"round\"/>";
  // A dot per feature while they are few enough to count.
  if (n <= 60)
    for (std::size_t k = 0; k < n; ++k)
      if (!std::isnan(c.values[k]))
        s += "<circle cx=\"" + xy(f.px(static_cast<double>(k + 1))) + "\" cy=\"" +
             xy(f.py(c.values[k])) + "\" r=\"2.5\" fill=\"" + kBlue + "\"/>";
  s += "</g>";
}

// The --fdr and --keep cuts, dashed, labelled above the plot.
void curve_cuts(std::string& s, const ReportScoreCurve& c, const CurveFrame& f) {
  struct Cut {
    std::int64_t rank;
    const char* colour;
    std::string label;
  };
  std::vector<Cut> cuts;
  if (c.fdr < 1 && c.fdr_rank > 0)
    cuts.push_back({c.fdr_rank, kVermillion,
                    "--fdr " + g(c.fdr) + ": last q \xE2\x89\xA4 " + g(c.fdr) + " at rank " +
                        count(c.fdr_rank)});
  if (c.keep > 0 && c.keep_rank > 0)
    cuts.push_back({c.keep_rank, kInk,
                    "--keep " + count(c.keep) + ": " +
                        (static_cast<std::int64_t>(c.kept_ranks.size()) < c.keep
                             ? "only " + count(static_cast<std::int64_t>(c.kept_ranks.size())) +
                                   " kept, the last"
                             : "the " + count(c.keep) + "th kept") +
                        " at rank " + count(c.keep_rank)});
  for (std::size_t k = 0; k < cuts.size(); ++k) {
    const double p = f.px(static_cast<double>(cuts[k].rank));
    line(s, p, f.top - (k == 0 ? 8 : 22), p, f.top + f.plot_h, cuts[k].colour, 1.5, "5 3");
    const bool east = p < f.width - 280;
    text(s, p + (east ? 4 : -4), f.top - (k == 0 ? 12 : 26), esc(cuts[k].label),
         east ? "start" : "end", "cut");
  }
}

// The caption under the score curve: what it shows, where the cuts fell, how to read it.
std::string curve_caption(const ReportScoreCurve& c, std::int64_t infinite) {
  std::string caption = "All " + count(static_cast<std::int64_t>(c.values.size())) +
                        " ranked features, best first: ranking.tsv lists the kept ones and "
                        "selection-log.tsv the score of every one. ";
  if (c.fdr < 1) {
    caption += c.fdr_passed > 0
                   ? count(c.fdr_passed) + " have " + c.q_column + " \xE2\x89\xA4 " + g(c.fdr) +
                         " (--fdr), the last at rank " + count(c.fdr_rank) + ". "
                   : "None has " + c.q_column + " \xE2\x89\xA4 " + g(c.fdr) + ". ";
  }
  if (c.keep > 0 && c.keep_rank > 0)
    caption += static_cast<std::int64_t>(c.kept_ranks.size()) < c.keep
                   ? "--keep " + count(c.keep) + " asked for more than the " +
                         count(static_cast<std::int64_t>(c.kept_ranks.size())) +
                         " features left to keep; the last kept is at rank " + count(c.keep_rank) +
                         ". "
                   : "The " + count(c.keep) + "th kept feature (--keep " + count(c.keep) +
                         ") is at rank " + count(c.keep_rank) + ". ";
  if (!c.kept_ranks.empty() &&
      c.kept_ranks.back() != static_cast<std::int64_t>(c.kept_ranks.size()))
    caption +=
        "Features between the green ticks were not kept: a later step (redundancy, --fdr) "
        "dropped them. ";
  caption +=
      "Where the curve levels off, further features add little: a K near the bend keeps "
      "the clearly related ones.";
  if (infinite > 0)
    caption += " " + count(infinite) +
               " features with an infinite score (the classes do not overlap) are drawn at the "
               "top.";
  return caption;
}

}  // namespace

std::string score_curve_html(const ReportScoreCurve& c) {
  if (c.values.empty()) return "";
  const CurveFrame f = curve_frame(c);
  std::string s = svg_open(f.width, f.top + f.plot_h + f.bottom,
                           "Score of every ranked feature against its rank");
  curve_axes(s, c, f);
  kept_rug(s, c, f);
  curve_line(s, c, f);
  curve_cuts(s, c, f);
  s += "</svg>";

  std::string legend = "<ul class=\"legend\"><li>" + swatch(kBlue, Mark::kLine) + " " +
                       (c.absolute ? "|" + esc(c.column) + "|" : esc(c.column)) +
                       " of the feature at each rank</li>";
  if (!c.kept_ranks.empty())
    legend += "<li>" + swatch(kGreen) + " kept (" +
              count(static_cast<std::int64_t>(c.kept_ranks.size())) + ")</li>";
  legend += "</ul>";
  return "<h3 id=\"score-curve\">Score against rank</h3>" +
         figure(s + legend, esc(curve_caption(c, f.infinite)));
}

std::string p_values_html(const ReportHistogram& h) {
  if (h.values.empty()) return "";
  std::string extra;
  const std::string svg = histogram_svg(h, extra);
  const std::string legend = "<ul class=\"legend\"><li>" + swatch(kBlue) + " features</li><li>" +
                             swatch(kOrange, Mark::kLine) + " " + esc(h.level_label) + "</li></ul>";
  return "<h3 id=\"" + esc(h.id) + "\">" + esc(h.title) + "</h3>" +
         figure(svg + legend, esc(h.caption) + (extra.empty() ? "" : " " + esc(extra)));
}

Classes marks_of(const ReportSamples& d, std::string& note) {
  Classes c;
  note.clear();
  std::map<std::string, std::int64_t> counts;
  std::int64_t missing = 0;
  for (const auto& m : d.marks) {
    if (m.empty())
      ++missing;
    else
      ++counts[m];
  }
  std::vector<std::pair<std::string, std::int64_t>> values(counts.begin(), counts.end());
  std::map<std::string, std::size_t> index;
  if (values.size() <= kClassColourCount) {
    for (const auto& [name, n] : values) {
      index[name] = c.names.size();
      c.colours.push_back(mark_colour(c.names.size()));
      c.names.push_back(name);
      c.counts.push_back(n);
    }
  } else {
    // The 7 most frequent values (ties by name) get a colour each, the rest share grey.
    std::stable_sort(values.begin(), values.end(),
                     [](const auto& a, const auto& b) { return a.second > b.second; });
    const std::size_t coloured = kClassColourCount - 1;
    std::int64_t rest = 0;
    for (std::size_t k = 0; k < values.size(); ++k) {
      if (k < coloured) {
        index[values[k].first] = k;
        c.colours.push_back(mark_colour(k));
        c.names.push_back(values[k].first);
        c.counts.push_back(values[k].second);
      } else {
        index[values[k].first] = coloured;
        rest += values[k].second;
      }
    }
    const auto others = static_cast<std::int64_t>(values.size() - coloured);
    c.names.push_back("other (" + count(others) + " values)");
    c.colours.push_back(kOther);
    c.counts.push_back(rest);
    note = d.mark_name + " has " + count(static_cast<std::int64_t>(values.size())) +
           " distinct values: the 7 most frequent have a colour each, the other " + count(others) +
           " (" + count(rest) + " samples) are drawn grey.";
  }
  if (missing > 0) {
    index[""] = c.names.size();
    c.names.push_back("missing");
    c.colours.push_back(kMissing);
    c.counts.push_back(missing);
    c.has_missing = true;
  }
  c.of.reserve(d.marks.size());
  for (const auto& m : d.marks) c.of.push_back(index[m]);
  return c;
}

namespace {

// The groups of a strip plot: the classes (sorted by name, coloured as on the sample plots), or
// every sample; which samples are shown, and which of those are drawn.
struct StripGroups {
  std::vector<std::string> names;
  std::vector<std::string> colours;
  std::vector<std::int64_t> group;  // per sample; -1: not shown (no label)
  std::int64_t unlabelled = 0;
  std::vector<std::int64_t> size;     // per group
  std::vector<std::size_t> position;  // per sample: its place among the shown ones
  std::int64_t shown = 0;
  std::size_t stride = 1;  // every stride-th shown sample is drawn

  bool drawn(std::size_t i) const { return position[i] % stride == 0; }
};

StripGroups strip_groups(const ReportTopFeatures& top, const Classes& scatter_classes) {
  const std::size_t n = top.ids.size();
  StripGroups sg;
  sg.group.assign(n, -1);
  if (top.labels.empty()) {
    sg.names = {"all samples"};
    sg.colours = {kBlue};
    std::fill(sg.group.begin(), sg.group.end(), 0);
  } else {
    std::map<std::string, std::int64_t> index;
    for (const auto& l : top.labels)
      if (!l.empty()) index.emplace(l, 0);
    for (auto& [name, k] : index) {
      k = static_cast<std::int64_t>(sg.names.size());
      sg.names.push_back(name);
      std::string colour = colour_of(sg.names.size() - 1);
      for (std::size_t m = 0; m < scatter_classes.names.size(); ++m)
        if (scatter_classes.names[m] == name &&
            !(scatter_classes.has_missing && m + 1 == scatter_classes.names.size()))
          colour = scatter_classes.colours[m];
      sg.colours.push_back(colour);
    }
    for (std::size_t i = 0; i < n; ++i) {
      if (top.labels[i].empty())
        ++sg.unlabelled;
      else
        sg.group[i] = index[top.labels[i]];
    }
  }
  sg.size.assign(sg.names.size(), 0);
  // Each shown sample's position among the shown ones, in file order: thinning keeps the same
  // samples in every plot.
  sg.position.assign(n, 0);
  std::size_t next = 0;
  for (std::size_t i = 0; i < n; ++i) {
    if (sg.group[i] < 0) continue;
    ++sg.size[static_cast<std::size_t>(sg.group[i])];
    sg.position[i] = next++;
  }
  // Past kReportMaxStripPoints shown samples every stride-th one is drawn (the same in every plot).
  sg.shown = static_cast<std::int64_t>(n) - sg.unlabelled;
  sg.stride =
      static_cast<std::size_t>(sg.shown) > kReportMaxStripPoints
          ? (static_cast<std::size_t>(sg.shown) + kReportMaxStripPoints - 1) / kReportMaxStripPoints
          : 1;
  return sg;
}

// The size of one strip plot; the classes' names are turned when more than four share it.
struct StripFrame {
  static constexpr double width = 300, left = 56, right = 8, top_y = 26, plot_h = 180;
  bool rotate = false;
  double bottom = 0, height = 0, slot = 0, r = 0;

  StripFrame(std::size_t groups, std::int64_t shown)
      : rotate(groups > 4),
        bottom(rotate ? 70 : 34),
        height(top_y + plot_h + bottom),
        slot((width - left - right) / static_cast<double>(groups)),
        r(shown <= 200 ? 2.6 : 2.0) {}
};

// One class in one strip plot: the box of its quartiles, its samples as dots, its median, and
// its name under the slot. `v` holds the class's finite values, sorted.
void strip_group(std::string& s, const ReportTopFeatures& top, const ReportStrip& st,
                 const StripGroups& sg, const StripFrame& fr, const Scale& y, std::size_t k,
                 const std::vector<double>& v) {
  const std::size_t n = top.ids.size();
  const double q1 = quantile(v, 0.25), median = quantile(v, 0.5), q3 = quantile(v, 0.75);
  const double cx = fr.left + fr.slot * (static_cast<double>(k) + 0.5);
  const double box_w = std::min(44.0, fr.slot * 0.62);
  const std::string& name = sg.names[k];
  s += "<g class=\"strip-group\" data-class=\"" + esc(name) + "\" data-n=\"" +
       std::to_string(v.size()) + "\"";
  if (!v.empty())
    s += " data-q1=\"" + shortest(q1) + "\" data-median=\"" + shortest(median) + "\" data-q3=\"" +
         shortest(q3) + "\"";
  s += ">";
  if (!v.empty()) {
    s += "<rect x=\"" + xy(cx - box_w / 2) + "\" y=\"" + xy(y(q3)) + "\" width=\"" + xy(box_w) +
         "\" height=\"" + xy(std::max(0.0, y(q1) - y(q3))) + "\" fill=\"none\" stroke=\"" + kAxis +
         "\" stroke-width=\"1\"><title>" + esc(name) + ": median " + esc(g(median, 4)) +
         ", quartiles " + esc(g(q1, 4)) + " to " + esc(g(q3, 4)) + " (" +
         count(static_cast<std::int64_t>(v.size())) + " samples)</title></rect>";
  }
  for (std::size_t i = 0; i < n && i < st.values.size(); ++i) {
    if (sg.group[i] != static_cast<std::int64_t>(k) || !sg.drawn(i)) continue;
    const float value = st.values[i];
    if (!std::isfinite(value)) continue;
    const double dx = jitter(i) * box_w * 1.1;
    s += "<circle cx=\"" + xy(cx + dx) + "\" cy=\"" + xy(y(value)) + "\" r=\"" + xy(fr.r) +
         "\" fill=\"" + sg.colours[k] + "\" fill-opacity=\"0.7\" data-value=\"" + shortest(value) +
         "\"><title>" + esc(top.ids[i]) + (top.labels.empty() ? "" : " \xC2\xB7 " + esc(name)) +
         " \xC2\xB7 " + esc(g(value, 4)) + "</title></circle>";
  }
  if (!v.empty()) line(s, cx - box_w / 2 - 3, y(median), cx + box_w / 2 + 3, y(median), kInk, 2);
  s += "</g>";
  // The class under its slot.
  const std::size_t fit = std::max<std::size_t>(4, static_cast<std::size_t>(fr.slot / 7));
  if (fr.rotate) {
    s += "<text class=\"tick\" text-anchor=\"end\" transform=\"translate(" + xy(cx + 3) + " " +
         xy(fr.top_y + fr.plot_h + 12) + ") rotate(-40)\">" + esc_short(name, 14) + "</text>";
  } else {
    text(s, cx, fr.top_y + fr.plot_h + 16, esc_short(name, fit), "middle", "tick");
  }
}

// The strip plot of the f-th top feature; `without_value` counts the shown samples it has no
// finite value for.
std::string strip_panel(const ReportTopFeatures& top, std::size_t f, const StripGroups& sg,
                        const StripFrame& fr, std::int64_t& without_value) {
  const std::size_t n = top.ids.size(), groups = sg.names.size();
  const double width = fr.width, left = fr.left, right = fr.right, top_y = fr.top_y;
  const double plot_h = fr.plot_h;
  const ReportStrip& st = top.strips[f];
  double lo = kNaN, hi = kNaN;
  std::vector<std::vector<double>> by_group(groups);
  for (std::size_t i = 0; i < n && i < st.values.size(); ++i) {
    const double v = st.values[i];
    if (sg.group[i] < 0) continue;
    if (!std::isfinite(v)) {
      ++without_value;
      continue;
    }
    by_group[static_cast<std::size_t>(sg.group[i])].push_back(v);
    lo = std::isnan(lo) ? v : std::min(lo, v);
    hi = std::isnan(hi) ? v : std::max(hi, v);
  }
  if (std::isnan(lo)) lo = hi = 0;
  const double pad = hi > lo ? (hi - lo) * 0.06 : 1;
  const Scale y{lo - pad, hi + pad, top_y + plot_h, top_y};
  std::string s = svg_open(width, fr.height, "Values of " + st.name + " by class");
  s += "<g class=\"strip\" data-rank=\"" + std::to_string(f + 1) + "\" data-feature=\"" +
       esc(st.name) + "\" data-column=\"" + std::to_string(st.column) + "\">";
  text(s, left, top_y - 10, esc_short(st.name, 34), "start", "label", "font-weight=\"600\"");
  line(s, left, top_y, left, top_y + plot_h, kAxis);
  for (const double t : linear_ticks(y.d0, y.d1, 5)) {
    line(s, left - 4, y.raw(t), left, y.raw(t), kAxis);
    line(s, left, y.raw(t), width - right, y.raw(t), "#f0f0f0");
    text(s, left - 7, y.raw(t) + 4, esc(g(t, 3)), "end", "tick");
  }
  line(s, left, top_y + plot_h, width - right, top_y + plot_h, kAxis);
  for (std::size_t k = 0; k < groups; ++k) {
    std::sort(by_group[k].begin(), by_group[k].end());
    strip_group(s, top, st, sg, fr, y, k, by_group[k]);
  }
  s += "</g></svg>";
  return "<figure>" + s + "</figure>";
}

// The sentence under the strip plots on samples left out or thinned and values missing, or "".
std::string strip_notes(const StripGroups& sg, std::int64_t without_value) {
  std::string notes;
  if (sg.unlabelled > 0)
    notes +=
        count(sg.unlabelled) + (sg.unlabelled == 1 ? " sample without a label is not shown. "
                                                   : " samples without a label are not shown. ");
  if (sg.stride > 1)
    notes += "One sample in " + std::to_string(sg.stride) + " is drawn (" +
             count(static_cast<std::int64_t>((static_cast<std::size_t>(sg.shown) + sg.stride - 1) /
                                             sg.stride)) +
             " of " + count(sg.shown) + "); the boxes use every sample. ";
  if (without_value > 0) notes += count(without_value) + " values missing are not shown. ";
  if (notes.empty()) return "";
  return "<p class=\"none\">" + esc(notes.substr(0, notes.size() - 1)) + "</p>";
}

// The scatter plots of the top features against a continuous target: the samples shown (those
// with a target value) and, past kReportMaxStripPoints of them, every stride-th drawn, the same
// samples in every plot (as the strip plots thin).
struct TargetPoints {
  std::vector<char> shown;            // per sample
  std::vector<std::size_t> position;  // per sample: its place among the shown ones
  std::int64_t n_shown = 0, without_target = 0;
  std::size_t stride = 1;
  double lo = kNaN, hi = kNaN;  // the shown target values' range

  bool drawn(std::size_t i) const { return shown[i] && position[i] % stride == 0; }
};

TargetPoints target_points(const ReportTopFeatures& top) {
  const std::size_t n = top.ids.size();
  TargetPoints tp;
  tp.shown.assign(n, 0);
  tp.position.assign(n, 0);
  std::size_t next = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const double t = i < top.target.size() ? top.target[i] : kNaN;
    if (!std::isfinite(t)) {
      ++tp.without_target;
      continue;
    }
    tp.shown[i] = 1;
    tp.position[i] = next++;
    tp.lo = std::isnan(tp.lo) ? t : std::min(tp.lo, t);
    tp.hi = std::isnan(tp.hi) ? t : std::max(tp.hi, t);
  }
  tp.n_shown = static_cast<std::int64_t>(next);
  tp.stride =
      next > kReportMaxStripPoints ? (next + kReportMaxStripPoints - 1) / kReportMaxStripPoints : 1;
  return tp;
}

// The size of one scatter plot against the target (the strip plots' width, so they tile alike).
struct TargetFrame {
  static constexpr double width = 300, left = 56, right = 10, top_y = 26, plot_h = 180, bottom = 46;
  static constexpr double height = top_y + plot_h + bottom;
};

// The scatter plot of the f-th top feature against the target, with its Pearson r and Spearman
// rho under it when the ranking has them; `without_value` counts the shown samples it has no
// finite value for.
std::string target_panel(const ReportTopFeatures& top, std::size_t f, const TargetPoints& tp,
                         const ReportRanking& ranking, std::int64_t& without_value) {
  using F = TargetFrame;
  const std::size_t n = top.ids.size();
  const ReportStrip& st = top.strips[f];
  const std::string target_name = top.label_name.empty() ? std::string("target") : top.label_name;
  double lo = kNaN, hi = kNaN;
  for (std::size_t i = 0; i < n; ++i) {
    if (!tp.shown[i]) continue;
    const double v = i < st.values.size() ? st.values[i] : kNaN;
    if (!std::isfinite(v)) {
      ++without_value;
      continue;
    }
    lo = std::isnan(lo) ? v : std::min(lo, v);
    hi = std::isnan(hi) ? v : std::max(hi, v);
  }
  if (std::isnan(lo)) lo = hi = 0;
  const double pad = hi > lo ? (hi - lo) * 0.06 : 1;
  const double x_pad = tp.hi > tp.lo ? (tp.hi - tp.lo) * 0.06 : 1;
  const Scale y{lo - pad, hi + pad, F::top_y + F::plot_h, F::top_y};
  const Scale x{tp.lo - x_pad, tp.hi + x_pad, F::left, F::width - F::right};
  const double foot = F::top_y + F::plot_h;
  std::string s = svg_open(F::width, F::height, "Values of " + st.name + " against " + target_name);
  s += "<g class=\"target-scatter\" data-rank=\"" + std::to_string(f + 1) + "\" data-feature=\"" +
       esc(st.name) + "\" data-column=\"" + std::to_string(st.column) + "\">";
  text(s, F::left, F::top_y - 10, esc_short(st.name, 34), "start", "label", "font-weight=\"600\"");
  // The feature's value up, with its grid.
  line(s, F::left, F::top_y, F::left, foot, kAxis);
  for (const double t : linear_ticks(y.d0, y.d1, 5)) {
    line(s, F::left - 4, y.raw(t), F::left, y.raw(t), kAxis);
    line(s, F::left, y.raw(t), F::width - F::right, y.raw(t), "#f0f0f0");
    text(s, F::left - 7, y.raw(t) + 4, esc(g(t, 3)), "end", "tick");
  }
  // The target across, with its grid, its ticks and its name.
  line(s, F::left, foot, F::width - F::right, foot, kAxis);
  for (const double t : linear_ticks(x.d0, x.d1, 4)) {
    line(s, x.raw(t), F::top_y, x.raw(t), foot, "#f0f0f0");
    line(s, x.raw(t), foot, x.raw(t), foot + 4, kAxis);
    text(s, x.raw(t), foot + 16, esc(g(t, 3)), "middle", "tick");
  }
  text(s, (F::left + F::width - F::right) / 2, foot + 36, esc_short(target_name, 40), "middle",
       "label");
  // Every drawn sample, in file order.
  const double r = tp.n_shown <= 200 ? 2.6 : 2.0;
  for (std::size_t i = 0; i < n && i < st.values.size(); ++i) {
    if (!tp.drawn(i)) continue;
    const float value = st.values[i];
    if (!std::isfinite(value)) continue;
    const double t = top.target[i];
    s += "<circle cx=\"" + xy(x(t)) + "\" cy=\"" + xy(y(value)) + "\" r=\"" + xy(r) + "\" fill=\"" +
         kBlue + "\" fill-opacity=\"0.7\" data-target=\"" + shortest(t) + "\" data-value=\"" +
         shortest(value) + "\"><title>" + esc(top.ids[i]) + " \xC2\xB7 " + esc(target_name) + " " +
         esc(g(t, 4)) + " \xC2\xB7 " + esc(g(value, 4)) + "</title></circle>";
  }
  s += "</g></svg>";
  // Its correlations, as ranking.tsv gives them.
  std::string caption;
  for (const ReportBar& b : ranking.bars)
    if (b.name == st.name && (!std::isnan(b.spearman_rho) || !std::isnan(b.pearson_r))) {
      caption = "Spearman rho " + g(b.spearman_rho, 3) + ", Pearson r " + g(b.pearson_r, 3);
      break;
    }
  return "<figure>" + s + (caption.empty() ? "" : "<figcaption>" + esc(caption) + "</figcaption>") +
         "</figure>";
}

// The section of scatter plots against a continuous target.
std::string target_features_html(const ReportTopFeatures& top, const ReportRanking& ranking) {
  const TargetPoints tp = target_points(top);
  if (tp.n_shown == 0) return "";  // no sample with a target value: nothing to draw
  const std::string target_name =
      top.label_name.empty() ? std::string("the target") : top.label_name;
  std::string panels;
  std::int64_t without_value = 0;
  for (std::size_t f = 0; f < top.strips.size(); ++f)
    panels += target_panel(top, f, tp, ranking, without_value);
  std::string h = "<section id=\"top-features\"><h2>Top features, sample by sample</h2>";
  h += "<p class=\"lead\">The first " + std::to_string(top.strips.size()) +
       " kept features in ranking order against " + esc(target_name) + ": every sample a dot, " +
       esc(target_name) +
       " across and the feature's value up. Under each plot, its correlations with " +
       esc(target_name) + " where the ranking lists them." +
       (top.values_note.empty() ? std::string() : " " + esc(sentence(top.values_note))) + "</p>";
  h += "<div class=\"strips\">" + panels + "</div>";
  std::string notes;
  if (tp.without_target > 0)
    notes +=
        count(tp.without_target) +
        (tp.without_target == 1 ? " sample without a value of " : " samples without a value of ") +
        target_name + (tp.without_target == 1 ? " is" : " are") + " not shown. ";
  if (tp.stride > 1)
    notes += "One sample in " + std::to_string(tp.stride) + " is drawn (" +
             count(static_cast<std::int64_t>(
                 (static_cast<std::size_t>(tp.n_shown) + tp.stride - 1) / tp.stride)) +
             " of " + count(tp.n_shown) + "). ";
  if (without_value > 0)
    notes += count(without_value) + (without_value == 1 ? " value missing is not shown. "
                                                        : " values missing are not shown. ");
  if (!notes.empty()) h += "<p class=\"none\">" + esc(notes.substr(0, notes.size() - 1)) + "</p>";
  h += "</section>\n";
  return h;
}

}  // namespace

std::string top_features_html(const ReportTopFeatures& top, const Classes& scatter_classes,
                              const ReportRanking& ranking) {
  if (top.strips.empty()) return "";
  if (top.labels.empty() && !top.target.empty()) return target_features_html(top, ranking);
  const StripGroups sg = strip_groups(top, scatter_classes);
  const std::size_t groups = sg.names.size();
  if (groups == 0) return "";  // every sample without a label: nothing to draw
  const StripFrame fr(groups, sg.shown);
  std::string panels;
  std::int64_t without_value = 0;
  for (std::size_t f = 0; f < top.strips.size(); ++f)
    panels += strip_panel(top, f, sg, fr, without_value);

  std::string h = "<section id=\"top-features\"><h2>Top features, sample by sample</h2>";
  h += "<p class=\"lead\">The first " + std::to_string(top.strips.size()) +
       " kept features in ranking order" +
       (top.labels.empty()
            ? std::string(", every sample a dot (no labels, so one strip each)")
            : ", every sample a dot in its class" +
                  (top.label_name.empty() ? std::string() : " (" + esc(top.label_name) + ")")) +
       ". Dots are spread sideways by a fixed amount per sample (not at random, so the page is the "
       "same on every run); the box spans the middle half of the values (first to third "
       "quartile) and the black line is the median." +
       (top.values_note.empty() ? std::string() : " " + esc(sentence(top.values_note))) + "</p>";
  h += "<div class=\"strips\">" + panels + "</div>";
  if (!top.labels.empty()) {
    h += "<ul class=\"legend\">";
    for (std::size_t k = 0; k < groups; ++k)
      h += "<li>" + swatch(sg.colours[k].c_str(), Mark::kDot) + " " + esc(sg.names[k]) + " (" +
           count(sg.size[k]) + ")</li>";
    h += "</ul>";
  }
  h += strip_notes(sg, without_value);
  h += "</section>\n";
  return h;
}

}  // namespace internal::html

using namespace internal::html;

void add_ranking(ReportData& d, const FeatureTable& t, const FeatureScores& s,
                 std::span<const std::size_t> order_all, std::span<const std::size_t> kept,
                 Criterion criterion, double fdr, std::int64_t keep) {
  const auto name_of = [&](std::size_t i) {
    return t.feature_names[static_cast<std::size_t>(s.feature[i])];
  };
  const bool continuous = s.continuous;
  // pearson and spearman rank by |r| and |rho|: the bar is the magnitude, the text the signed
  // value ranking.tsv writes.
  const std::vector<double>* signed_score = criterion == Criterion::kPearson    ? &s.pearson_r
                                            : criterion == Criterion::kSpearman ? &s.spearman_rho
                                                                                : nullptr;
  // The leading features, as ranking.tsv writes them.
  d.ranking = {};
  d.ranking_note.clear();
  d.ranking.criterion = criterion_name(criterion);
  d.ranking.column = criterion_column(criterion, continuous);
  d.ranking.q_column = criterion_q_column(criterion, continuous);
  d.ranking.axis = criterion_axis(criterion, continuous);
  d.ranking.continuous = continuous;
  d.ranking.total = static_cast<std::int64_t>(kept.size());
  for (std::size_t k = 0; k < kept.size() && k < 30; ++k) {
    ReportBar b;
    b.name = name_of(kept[k]);
    b.value = criterion_score(s, criterion, kept[k]);
    if (!d.ranking.q_column.empty()) b.q = criterion_q(s, criterion, kept[k]);
    if (signed_score != nullptr) b.shown = (*signed_score)[kept[k]];
    b.raw_value = shortest(std::isnan(b.shown) ? b.value : b.shown);
    if (!std::isnan(b.q)) b.raw_q = shortest(b.q);
    if (continuous) {
      b.pearson_r = s.pearson_r[kept[k]];
      b.spearman_rho = s.spearman_rho[kept[k]];
      b.hover = "Pearson r " + g(b.pearson_r, 3) + ", Spearman rho " + g(b.spearman_rho, 3);
    }
    d.ranking.bars.push_back(std::move(b));
  }
  const std::string test = criterion_test(criterion, continuous);
  d.ranking.caption = test.empty() ? "Ranked by variance."
                                   : "Right: q-value (Benjamini\xE2\x80\x93Hochberg) of " + test +
                                         ". Hover a bar for the exact value.";
  if (signed_score != nullptr)
    d.ranking.caption +=
        std::string(" A bar's length is |") + (criterion == Criterion::kPearson ? "r" : "rho") +
        "|; the number keeps its sign (negative: the feature falls as " +
        (t.label_name.empty() ? std::string("the target") : t.label_name) + " rises).";
  else if (continuous && criterion == Criterion::kMi)
    d.ranking.caption += " MI has no test of its own: --fdr uses Spearman's.";

  // The score curve over every ranked feature.
  std::vector<std::int64_t> rank_of(s.size(), 0);
  std::vector<double> values, q;
  values.reserve(order_all.size());
  for (std::size_t k = 0; k < order_all.size(); ++k) {
    rank_of[order_all[k]] = static_cast<std::int64_t>(k + 1);
    values.push_back(criterion_score(s, criterion, order_all[k]));
    if (!d.ranking.q_column.empty()) q.push_back(criterion_q(s, criterion, order_all[k]));
  }
  std::vector<std::int64_t> kept_ranks;
  kept_ranks.reserve(kept.size());
  for (const std::size_t i : kept) kept_ranks.push_back(rank_of[i]);
  d.score_curve = {};
  set_score_curve(d.score_curve, std::move(values), q, std::move(kept_ranks), fdr, keep);
  d.score_curve.column = d.ranking.column;
  d.score_curve.q_column = d.ranking.q_column;
  d.score_curve.axis = d.ranking.axis;
  d.score_curve.absolute = signed_score != nullptr;

  // The p-values of the ranking test over every scored feature.
  d.p_values = {};
  const std::vector<double>* p = criterion_p(s, criterion);
  if (p == nullptr || p->empty()) return;
  ReportHistogram& h = d.p_values;
  h.id = "p-values";
  h.title = std::string("p-values of ") + criterion_test(criterion, continuous);
  h.axis = std::string("p-value (") + criterion_p_column(criterion, continuous) + ")";
  h.lo = 0;
  h.hi = 1;
  h.bin_width = 0.05;
  h.values = *p;
  const double m = static_cast<double>(p->size());
  h.level = m / 20;
  h.level_label = "expected with no signal: " + g(m / 20, 3) + " per bar";
  std::int64_t small = 0, ones = 0;
  for (const double v : *p) {
    small += v < 0.05;
    ones += v == 1;
  }
  h.caption = "All " + count(static_cast<std::int64_t>(p->size())) +
              " scored features, 20 bars of width 0.05 (a p-value on an edge goes to the bar "
              "above it; 1 to the last). If no feature were related to the " +
              std::string(continuous ? "target" : "class") +
              " the p-values "
              "would be uniform, about the dashed line in every bar; a spike at the left is "
              "signal. " +
              count(small) + " have p < 0.05, where " + g(m * 0.05, 3) +
              " would be expected by chance.";
  if (ones > 0)
    h.caption += " " + count(ones) +
                 " have p = 1 (constant, or too few values to test) and sit in the last bar.";
}

void add_top_features(ReportData& d, const FeatureTable& t, std::span<const std::int64_t> columns,
                      const std::string& values_note) {
  ReportTopFeatures& top = d.top_features;
  top = {};
  top.ids = t.sample_ids;
  top.labels = t.labels;
  top.target = t.target;
  top.label_name = t.label_name;
  top.values_note = values_note;
  const auto n = static_cast<std::size_t>(t.n_samples());
  for (std::size_t k = 0; k < columns.size() && k < kReportTopFeatures; ++k) {
    const std::int64_t j = columns[k];
    if (j < 0 || j >= t.n_features())
      throw std::out_of_range("add_top_features: column " + std::to_string(j) +
                              " is not a column of the table");
    ReportStrip st;
    st.name = t.feature_names[static_cast<std::size_t>(j)];
    st.column = j;
    const float* x = t.values.col(static_cast<Eigen::Index>(j)).data();
    st.values.assign(x, x + n);
    top.strips.push_back(std::move(st));
  }
}

}  // namespace pare
