// The builders that fill a ReportData from a run: add_reduction, add_components, add_screen,
// add_profile and add_plan_record, with the ranking words they and the plots share.
#include <algorithm>  // std::max, std::min, std::sort, std::stable_sort
#include <cmath>      // std::isnan
#include <map>        // std::map

#include "pare/report.h"

#include "internal/plan_sections.h"
#include "internal/criterion_facts.h"
#include "internal/report_html.h"
#include <nlohmann/json.hpp>

namespace pare {

// ---- builders
// -----------------------------------------------------------------------------------------

namespace internal::html {

const char* criterion_column(Criterion c, bool continuous) {
  return criterion_facts(c, continuous).column;
}
const char* criterion_q_column(Criterion c, bool continuous) {
  return criterion_facts(c, continuous).q_column;
}
const char* criterion_axis(Criterion c, bool continuous) {
  return criterion_facts(c, continuous).axis;
}

}  // namespace internal::html

using namespace internal::html;

namespace {

// The missing rate of every input feature, with the missing filter's cut when it ran.
// The frame of a missing-rate histogram (scan and reduce draw the same one).
ReportHistogram missing_rate_frame(const char* title) {
  ReportHistogram miss;
  miss.id = "missing";
  miss.title = title;
  miss.axis = "missing rate (fraction of samples without a value)";
  miss.lo = 0;
  miss.hi = 1;
  miss.bin_width = 0.02;
  miss.cut_keeps_equal_above = false;
  return miss;
}

ReportHistogram missing_histogram(const Reduction& r, const ReduceOptions& o, bool selection) {
  const std::size_t p = r.decisions.size();
  ReportHistogram miss = missing_rate_frame("Missing rate of every input feature");
  miss.values.reserve(p);
  for (std::size_t j = 0; j < p; ++j) miss.values.push_back(r.raw_stats[j].missing_rate());
  std::int64_t miss_dropped = 0;
  if (selection && o.missing_filter) {
    miss.dropped.resize(p);
    for (std::size_t j = 0; j < p; ++j)
      miss_dropped += miss.dropped[j] =
          !r.decisions[j].kept && r.decisions[j].step == Step::kMissing;
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
  return miss;
}

// The variance of every feature that reached the variance filter, with its cuts when it ran.
ReportHistogram variance_histogram(const Reduction& r, const ReduceOptions& o, bool selection) {
  const std::size_t p = r.decisions.size();
  ReportHistogram var;
  var.id = "variance";
  var.title = "Variance of the features that reached the variance filter";
  var.axis = std::string("sample variance, log scale (") +
             (o.log2 ? "of log2(x + 1) values" : "squared units of the data") + ")";
  var.log_x = true;
  var.cut_keeps_equal_above = true;
  std::vector<std::size_t> reached;
  for (std::size_t j = 0; j < p; ++j)
    if (!(r.decisions[j].step == Step::kMissing && !r.decisions[j].kept)) reached.push_back(j);
  std::int64_t var_dropped = 0;
  double boundary = kNaN;
  for (const std::size_t j : reached) var.values.push_back(r.variance[j]);
  if (selection && o.variance_filter) {
    for (const std::size_t j : reached) {
      const bool gone = !r.decisions[j].kept && r.decisions[j].step == Step::kVariance;
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
  return var;
}

// Stability selection: how often each ranked feature was kept, with the cut at PI.
ReportHistogram stability_histogram(const Reduction& r) {
  const StabilityRecord& st = *r.stability;
  const auto B = static_cast<double>(st.options.resamples);
  ReportHistogram h;
  h.id = "stability";
  h.title = "Stability of every ranked feature";
  h.axis = "fraction of the " + count(st.options.resamples) + " subsets that kept it";
  h.lo = 0;
  h.hi = 1;
  h.bin_width = 0.05;
  h.cut_keeps_equal_above = true;
  h.dropped_label = "below the minimum stability";
  h.kept_label = "stable";
  for (std::size_t j = 0; j < r.decisions.size(); ++j) {
    const Decision& dec = r.decisions[j];
    if (!dec.kept && (dec.step == Step::kMissing || dec.step == Step::kVariance)) continue;
    h.values.push_back(st.kept_in[j] / B);
    h.dropped.push_back(!dec.kept && dec.step == Step::kStability);
  }
  h.cuts.push_back({st.options.min_stability, "min stability " + g(st.options.min_stability)});
  h.caption = count(st.p) + " features ranked, each subset keeping " + count(st.q) + "; " + count(st.selected) +
              " kept in at least " + g(st.options.min_stability) +
              " of the subsets. Expected false selections among them at most " + g(st.bound) +
              " (q² / ((2·PI − 1)·p), Meinshausen & Bühlmann 2010).";
  return h;
}

// Without labels (or with ranking off): the kept features as they come, and with ranking by
// variance the curve of every feature that reached the ranking.
void add_unsupervised_ranking(ReportData& d, const FeatureTable& t, const Reduction& r,
                              const ReduceOptions& o) {
  const std::size_t p = r.decisions.size();
  d.ranking.criterion = criterion_name(r.criterion);
  d.ranking.column = criterion_column(r.criterion);
  d.ranking.axis = criterion_axis(r.criterion);
  d.ranking.total = static_cast<std::int64_t>(r.kept.size());
  if (!o.relevance) {
    d.ranking_note = "No ranking ran: the kept features are in input order.";
    return;
  }
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
    if (dec.kept || (dec.step != Step::kMissing && dec.step != Step::kVariance))
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
  for (const std::int64_t j : r.kept) kept_ranks.push_back(rank_of[static_cast<std::size_t>(j)]);
  set_score_curve(d.score_curve, std::move(values), {}, std::move(kept_ranks), 1, o.keep);
  d.score_curve.column = "variance";
  d.score_curve.axis = criterion_axis(Criterion::kVariance);
}

// Redundancy groups: each kept feature and the dropped features that named it as their twin.
void add_redundancy_groups(ReportData& d, const FeatureTable& t, const Reduction& r,
                           const ReduceOptions& o) {
  const std::size_t p = r.decisions.size();
  d.has_redundancy = true;
  d.redundancy.max_corr = o.max_corr;
  std::map<std::int64_t, std::vector<std::int64_t>> groups;
  for (std::size_t j = 0; j < p; ++j) {
    const Decision& dec = r.decisions[j];
    if (!dec.kept && dec.step == Step::kRedundancy) {
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

}  // namespace

void add_reduction(ReportData& d, const FeatureTable& t, const Reduction& r, const ReduceOptions& o,
                   bool selection) {
  for (const auto& st : r.steps) d.steps.push_back({step_name(st.step), st.in, st.out, st.seconds});
  d.histograms.push_back(missing_histogram(r, o, selection));
  d.histograms.push_back(variance_histogram(r, o, selection));
  if (!selection) return;
  if (r.stability) d.histograms.push_back(stability_histogram(r));
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
    add_unsupervised_ranking(d, t, r, o);
  }
  if (o.prune) add_redundancy_groups(d, t, r, o);
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
                const std::vector<char>& dropped, const std::vector<double>& target) {
  ReportSamples& r = d.sample_info;
  r.ids = ids;
  r.labels = labels;
  r.target = target;
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
  ReportHistogram miss = missing_rate_frame("Missing rate of every feature");
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

void add_run_record(ReportData& d, const FeatureTable& t, const PipelineResult& result, const RunRecord& run,
                    const PlanProjection& pp) {
  ReportRecord& r = d.record;
  r.version = PARE_VERSION;
  r.command_line = run.command_line;
  const auto value_text = [](const nlohmann::json& v) { return v.is_string() ? v.get<std::string>() : v.dump(); };
  r.inputs.push_back({"data", run.input_path, run.input_sha256});
  if (!run.sheet_path.empty())
    r.inputs.push_back({"sample sheet (" + run.sheet_column + ")", run.sheet_path, run.sheet_sha256});
  r.parameters.emplace_back("seed", std::to_string(run.seed));
  // (each section held in a variable: a range-for over a temporary's items() would outlive it)
  const nlohmann::json read = internal::read_section(run, t);
  for (const auto& [k, v] : read.items()) r.parameters.emplace_back("read." + k, value_text(v));
  const nlohmann::json parameters = internal::parameters_section(result.options.reduce, result.reduction);
  for (const auto& [k, v] : parameters.items()) r.parameters.emplace_back(k, value_text(v));
  if (result.projection) {
    const nlohmann::json projection = internal::projection_section(result, pp);
    for (const char* key : {"components", "center", "scale", "method", "precision", "iterations", "residual"})
      r.parameters.emplace_back(std::string("projection.") + key, value_text(projection[key]));
  }
  for (const auto& st : result.reduction.steps) r.timings.emplace_back(step_name(st.step), st.seconds);
  r.timings.insert(r.timings.begin() + (r.timings.empty() ? 0 : 1), {"sample screen", result.screen_seconds});
  const nlohmann::json outputs = internal::outputs_section(t, result, pp);
  for (const auto& [k, v] : outputs.items()) r.outputs.push_back(value_text(v));
}

}  // namespace pare
