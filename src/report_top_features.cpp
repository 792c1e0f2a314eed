// report.html's plots of the leading kept features, sample by sample: strip plots by class (a box
// of the quartiles, every sample a dot), or scatter plots against a continuous target. The rest of
// the selection's plots are in src/report_plots.cpp; the page is assembled in src/report_page.cpp.
#include <algorithm>  // std::sort, std::min, std::max
#include <cmath>      // std::isfinite, std::floor
#include <cstdint>    // std::int64_t, std::uint64_t
#include <map>        // std::map
#include <stdexcept>  // std::out_of_range
#include <string>     // std::string
#include <vector>     // std::vector

#include "pare/report.h"

#include "internal/report_html.h"

namespace pare {

namespace internal::html {

namespace {

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

// `phrase` as a sentence: first letter capitalised, a full stop at the end.
std::string sentence(std::string phrase) {
  if (!phrase.empty() && phrase[0] >= 'a' && phrase[0] <= 'z')
    phrase[0] = static_cast<char>(phrase[0] - 'a' + 'A');
  if (!phrase.empty() && phrase.back() != '.') phrase += '.';
  return phrase;
}


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
