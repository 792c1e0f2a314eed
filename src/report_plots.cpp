// report.html, the parts that help choose and judge a selection: the score of every ranked
// feature against its rank (with the --fdr and --keep cuts), the ranking test's p-values, and the
// samples coloured by a sheet column (--mark-by). The plots of the leading kept features are in
// src/report_top_features.cpp; the page itself is assembled in src/report_page.cpp.
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


}  // namespace pare
