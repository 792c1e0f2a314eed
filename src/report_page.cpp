// report.html, the page: its style sheet, the legend and figure pieces, and report_html, which
// assembles the sections from a ReportData.
#include <cmath>  // std::isnan

#include "pare/report.h"

#include "internal/report_html.h"

namespace pare {

namespace internal::html {

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

namespace {

// The ids whose entry in `mask` is set (the flagged or the dropped samples).
std::vector<std::string> ids_where(const std::vector<std::string>& ids,
                                   const std::vector<char>& mask) {
  std::vector<std::string> out;
  for (std::size_t i = 0; i < mask.size(); ++i)
    if (mask[i]) out.push_back(ids[i]);
  return out;
}

// The doctype, the head with the style sheet, and the page header.
std::string page_head(const ReportData& d) {
  std::string h =
      "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
      "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n";
  h += "<title>" + esc(d.title) + "</title>\n<style>" + kStyle + "</style>\n</head>\n<body>\n";
  h += "<header><h1>" + esc(d.title) + "</h1><p class=\"sub\">pare " + esc(d.record.version) +
       " \xC2\xB7 " + esc(d.command) + " \xC2\xB7 " + count(d.samples) + " samples \xC3\x97 " +
       count(d.features) + " features</p></header>\n";
  return h;
}

// The "At a glance" item on the samples: how many, their classes, the outlier screen.
std::string glance_samples(const ReportSamples& si, const Classes& classes,
                           const std::vector<std::string>& flagged_names,
                           const std::vector<std::string>& dropped_names) {
  std::string h = "<li>" + count(static_cast<std::int64_t>(si.ids.size())) + " samples";
  if (!si.labels.empty()) {
    const std::size_t real = classes.names.size() - (classes.has_missing ? 1 : 0);
    h += " in " + std::to_string(real) + " classes (";
    for (std::size_t k = 0; k < real; ++k)
      h += (k ? ", " : "") + esc(classes.names[k]) + " " + count(classes.counts[k]);
    if (classes.has_missing) h += "; " + count(classes.counts.back()) + " without a label";
    h += ")";
  } else if (classes.ramp()) {
    h += std::isnan(classes.lo) ? " (none with a value of " + esc(classes.names[0]) + ")"
                                : " with " + esc(classes.names[0]) + " from " +
                                      esc(g(classes.lo, 4)) + " to " + esc(g(classes.hi, 4));
    if (classes.has_missing) h += " (" + count(classes.counts.back()) + " without a value)";
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
  return h;
}

// At a glance: what a newcomer should take away without reading further.
std::string glance_section(const ReportData& d, const Classes& classes,
                           const std::vector<std::string>& flagged_names,
                           const std::vector<std::string>& dropped_names) {
  std::string h = "<section id=\"glance\"><h2>At a glance</h2><ul class=\"glance\">";
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
         " " + esc(g(std::isnan(b.shown) ? b.value : b.shown)) +
         (std::isnan(b.q) ? std::string() : ", q " + esc(g(b.q))) + ").</li>";
  }
  if (!d.sample_info.ids.empty())
    h += glance_samples(d.sample_info, classes, flagged_names, dropped_names);
  if (!d.components.ratio.empty()) {
    h += "<li>The first " + std::to_string(d.components.ratio.size()) +
         " principal components carry " + esc(percent(d.components.cumulative.back())) +
         " of the variance of " + esc(d.components.source) + ".</li>";
  }
  h += "</ul></section>\n";
  return h;
}

std::string funnel_section(const ReportData& d) {
  if (d.steps.empty()) return "";
  std::string h =
      "<section id=\"funnel\"><h2>Selection funnel</h2><p class=\"lead\">Features into and out "
      "of every step, in "
      "the order they ran; the numbers are plan.json's step counts.</p>";
  h += figure(funnel_svg(d.steps), "");
  h += "</section>\n";
  return h;
}

// Where the filters cut (reduce) or the distributions scan flags in.
std::string distributions_section(const ReportData& d) {
  if (d.histograms.empty()) return "";
  std::string h =
      d.command == "scan"
          ? "<section id=\"distributions\"><h2>Distributions</h2><p class=\"lead\">Distributions "
            "over features; a dashed line marks a threshold, and vermillion bars are features "
            "scan flags (it removes nothing).</p>"
          : "<section id=\"distributions\"><h2>Where the filters cut</h2><p class=\"lead\">"
            "Distributions over features; a dashed line marks a threshold, and bars are "
            "vermillion where the filter removed the features.</p>";
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
  return h;
}

// The leading features, the score curve and the p-values.
std::string ranking_section(const ReportData& d) {
  if (d.ranking.bars.empty() && d.ranking_note.empty() && d.score_curve.values.empty() &&
      d.p_values.values.empty())
    return "";
  std::string h = "<section id=\"ranking\"><h2>Leading features</h2>";
  if (d.ranking.bars.empty()) {
    if (!d.ranking_note.empty()) h += "<p class=\"none\">" + esc(d.ranking_note) + "</p>";
  } else {
    h += "<p class=\"lead\">The first " + std::to_string(d.ranking.bars.size()) + " of " +
         count(d.ranking.total) + " kept features in ranking.tsv order, by " + esc(d.ranking.axis) +
         ".</p>";
    h += figure(bars_svg(d.ranking.bars, d.ranking.axis, !d.ranking.q_column.empty(), "feature",
                         "The leading features by the ranking criterion"),
                esc(d.ranking.caption));
  }
  h += score_curve_html(d.score_curve) + p_values_html(d.p_values);
  h += "</section>\n";
  return h;
}

std::string redundancy_section(const ReportData& d) {
  if (!d.has_redundancy) return "";
  const ReportRedundancy& r = d.redundancy;
  std::string h = "<section id=\"redundancy\"><h2>Redundancy</h2><p class=\"lead\">";
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
  return h;
}

std::string components_section(const ReportData& d) {
  if (d.components.ratio.empty()) return "";
  const ReportSamples& si = d.sample_info;
  std::string h =
      "<section id=\"components\"><h2>Principal components</h2><p class=\"lead\">Share of the "
      "variance of " +
      esc(d.components.source) +
      " carried by each component (bars) and by the first ones together (line).</p>";
  if (d.chosen_with_labels && d.components.of_kept && d.ranking.continuous)
    h += "<p class=\"caution\">These features were selected using the target" +
         (si.label_name.empty() ? std::string() : " (" + esc(si.label_name) + ")") +
         ", so the samples are expected to line up by it on these components, and on the sample "
         "plots below, even in data without a real relation: the pattern is not evidence by "
         "itself. To test it, select on training samples only and apply the plan to held-out "
         "ones (pare folds does both, fold by fold).</p>";
  else if (d.chosen_with_labels && d.components.of_kept)
    h += "<p class=\"caution\">These features were selected using the labels" +
         (si.label_name.empty() ? std::string() : " (" + esc(si.label_name) + ")") +
         ", so the classes are expected to separate on these components, and on the sample "
         "plots below, even in data without real differences: the separation is not evidence "
         "by itself. To test it, select on training samples only and apply the plan to "
         "held-out ones (pare folds does both, fold by fold).</p>";
  h += figure(scree_svg(d.components), "");
  h += "</section>\n";
  return h;
}

// The legend of a samples plot: a dot per group with its size, and the ring of a flagged sample.
// On a target's ramp: "<name>: low <the ramp> high" with the ends' values, and the samples without
// a value.
std::string scatter_legend(const Classes& c, bool rings, const std::string& heading) {
  std::string l = "<ul class=\"legend\">";
  if (c.ramp()) {
    l += "<li class=\"ramp\" data-lo=\"" + shortest(c.lo) + "\" data-hi=\"" + shortest(c.hi) +
         "\"><strong>" + esc(c.names[0]) + ":</strong> low (" + esc(g(c.lo, 4)) + ") " +
         ramp_swatch() + " high (" + esc(g(c.hi, 4)) + ")</li>";
    if (c.has_missing)
      l += "<li>" + swatch(kMissing, Mark::kDot) + " " + esc(c.names.back()) + " (" +
           count(c.counts.back()) + ")</li>";
    if (rings) l += "<li>" + swatch(kInk, Mark::kRing) + " flagged outlier</li>";
    return l + "</ul>";
  }
  if (!heading.empty()) l += "<li><strong>" + esc(heading) + ":</strong></li>";
  for (std::size_t k = 0; k < c.names.size(); ++k)
    l += "<li>" + swatch(c.colours[k].c_str(), Mark::kDot) + " " + esc(c.names[k]) + " (" +
         count(c.counts[k]) + ")</li>";
  if (rings) l += "<li>" + swatch(kInk, Mark::kRing) + " flagged outlier</li>";
  return l + "</ul>";
}

// The samples on PC1 against PC2 and PC3, or "" when there are not two components of scores for
// the samples.
std::string sample_scatters(const ReportData& d, const Classes& classes) {
  const ReportSamples& si = d.sample_info;
  const auto& sc = d.components.scores;
  const auto& rows = d.components.sample_of;
  if (!(sc.size() >= 2 &&
        (rows.empty() ? sc[0].size() == si.ids.size() : sc[0].size() == rows.size())))
    return "";
  // With --mark-by, every plot is drawn twice, side by side: by class and by the mark column.
  const bool marked = !si.marks.empty() && si.marks.size() == si.ids.size();
  std::string mark_note;
  const Classes marks = marked ? marks_of(si, mark_note) : Classes{};
  const std::string coloured_by =
      classes.ramp() ? "coloured by " + esc(classes.names[0]) + " (light: low, dark: high)"
                     : std::string("coloured by class");
  std::string h =
      "<p class=\"lead\">Each dot is a sample on the components above, " + coloured_by +
      std::string(marked ? " (left) and by " + esc(si.mark_name) + " (right)" : "") +
      std::string(si.screened ? "; a black ring marks a sample flagged as an outlier" : "") +
      ". Hover a dot for its id.</p>";
  h += "<div class=\"pair\">";
  const auto axis_name = [&](std::size_t k) {
    return "PC" + std::to_string(k + 1) + " score (" + percent(d.components.ratio[k]) +
           " of variance)";
  };
  for (std::size_t k = 1; k < sc.size() && k < 3; ++k) {
    const std::string aria = "Samples on PC1 and PC" + std::to_string(k + 1);
    h += figure(scatter_svg(sc[0], sc[k], rows, si, classes, axis_name(0), axis_name(k), aria), "");
    if (marked)
      h += figure(scatter_svg(sc[0], sc[k], rows, si, marks, axis_name(0), axis_name(k),
                              aria + " by " + si.mark_name),
                  "");
  }
  if (marked) {
    h += "<div>" + scatter_legend(classes, si.screened, si.labels.empty() ? "" : si.label_name) +
         "</div><div>" + scatter_legend(marks, si.screened, si.mark_name) +
         (mark_note.empty() ? "" : "<p class=\"none\">" + esc(mark_note) + "</p>") + "</div>";
    h += "</div>";
  } else {
    h += "</div>" + scatter_legend(classes, si.screened, "");
  }
  if (classes.names.size() - (classes.has_missing ? 1 : 0) > kClassColourCount)
    h += "<p class=\"none\">Classes past the eighth are drawn grey.</p>";
  if (!d.components.note.empty()) h += "<p class=\"none\">" + esc(d.components.note) + "</p>";
  return h;
}

// The robust distance of every sample from the outlier screen, with the flagged ones named.
std::string sample_distances(const ReportSamples& si, const std::vector<std::string>& flagged_names,
                             const std::vector<std::string>& dropped_names) {
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
  std::string h = "<h3 id=\"distance\">" + esc(dist.title) + "</h3>";
  h += figure(
      histogram_svg(dist, extra),
      "Screen: " + esc(si.screen_source) +
          ". Each component's scores are centred on their median (" +
          (si.labels.empty() && !si.target.empty()
               ? std::string("the screen does not use the target")
               : std::string("with labels, the median of the sample's class, so classes that "
                             "separate are not outliers")) +
          ") and divided "
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
  return h;
}

std::string sample_missing_rates(const ReportSamples& si) {
  ReportHistogram miss;
  miss.id = "sample-missing";
  miss.title = "Missing values per sample";
  miss.axis = "missing rate (fraction of the input features without a value)";
  miss.count_axis = "samples";
  miss.values = si.missing_rate;
  miss.lo = 0;
  std::string extra;
  return "<h3 id=\"sample-missing\">" + esc(miss.title) + "</h3>" +
         figure(histogram_svg(miss, extra), "");
}

// The samples on the components, their outlier screen and their missing rates.
std::string samples_section(const ReportData& d, const Classes& classes,
                            const std::vector<std::string>& flagged_names,
                            const std::vector<std::string>& dropped_names) {
  const ReportSamples& si = d.sample_info;
  if (si.ids.empty()) return "";
  std::string h = "<section id=\"samples\"><h2>Samples</h2>";
  h += sample_scatters(d, classes);
  if (si.screened)
    h += sample_distances(si, flagged_names, dropped_names);
  else
    h += "<p class=\"none\">Samples were not screened for outliers: " + esc(si.rule) + ".</p>";
  if (!si.missing_rate.empty()) h += sample_missing_rates(si);
  h += "</section>\n";
  return h;
}

// The parameters in two tables side by side: the list is long and each row short.
std::string parameter_tables(const ReportRecord& rec) {
  const std::size_t half = (rec.parameters.size() + 1) / 2;
  std::string h = "<h3>Parameters</h3><div class=\"pair\">";
  for (std::size_t part = 0; part < 2; ++part) {
    h += "<table><tr><th>parameter</th><th>value</th></tr>";
    for (std::size_t i = part * half; i < rec.parameters.size() && i < (part + 1) * half; ++i)
      h += "<tr><td>" + esc(rec.parameters[i].first) + "</td><td><code>" +
           esc(rec.parameters[i].second) + "</code></td></tr>";
    h += "</table>";
  }
  h += "</div>";
  return h;
}

// The run record: command line, inputs, parameters, timings and outputs; then the footer.
std::string record_section(const ReportRecord& rec) {
  std::string h = "<section id=\"record\" class=\"record\"><h2>Run record</h2>";
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
  if (!rec.parameters.empty()) h += parameter_tables(rec);
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

}  // namespace

std::string report_html(const ReportData& d) {
  std::string h;
  h.reserve(1 << 16);
  h += page_head(d);
  const Classes classes = classes_of(d.sample_info);
  const std::vector<std::string> flagged_names =
      ids_where(d.sample_info.ids, d.sample_info.flagged);
  const std::vector<std::string> dropped_names =
      ids_where(d.sample_info.ids, d.sample_info.dropped);
  h += glance_section(d, classes, flagged_names, dropped_names);
  h += funnel_section(d);
  h += distributions_section(d);
  h += ranking_section(d);
  h += top_features_html(d.top_features, classes, d.ranking);
  h += redundancy_section(d);
  h += components_section(d);
  h += samples_section(d, classes, flagged_names, dropped_names);
  h += record_section(d.record);
  return h;
}

}  // namespace pare
