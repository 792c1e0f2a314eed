// report.html: one self-contained page (inline CSS and SVG, no script, nothing fetched) that shows
// what a run did: the selection funnel, where the filters cut the distributions, the leading
// features, redundancy, the components and the samples on them, and the run record.
// report_html is a pure function of plain data; the add_* helpers fill that data from a run.
#pragma once

#include <cstdint>  // std::int64_t
#include <limits>   // std::numeric_limits
#include <span>     // std::span
#include <string>   // std::string
#include <utility>  // std::pair
#include <vector>   // std::vector

#include "pare/matrix.h"
#include "pare/outliers.h"
#include "pare/plan.h"
#include "pare/profile.h"
#include "pare/projection.h"
#include "pare/reduce.h"

namespace pare {

/// A step of the selection funnel: features in and out, and its wall time.
struct ReportStep {
  std::string name;
  std::int64_t in = 0;
  std::int64_t out = 0;
  double seconds = 0;
};

/// A vertical line on a histogram where a filter cuts.
struct ReportCut {
  double at = 0;
  std::string label;  ///< e.g. "max missing 0.2"
};

/// A distribution drawn as a histogram (count axis logarithmic, so a few features stay visible
/// beside many). Values that are NaN are left out and counted in the caption.
struct ReportHistogram {
  std::string id;  ///< anchor of the figure, e.g. "missing"
  std::string title;
  std::string axis;  ///< x axis label with units
  std::string count_axis = "features";
  bool log_x = false;  ///< log10 axis; values <= 0 then get a bar of their own ("0")
  double lo = std::numeric_limits<double>::quiet_NaN();  ///< axis range; NaN: from the data
  double hi = std::numeric_limits<double>::quiet_NaN();
  double bin_width = 0;               ///< in axis units (log10 units when log_x); 0: chosen
  bool cut_keeps_equal_above = true;  ///< the first cut drops values below it (variance) rather
                                      ///< than above it (missing rate): decides which bin an
                                      ///< edge value falls in
  std::vector<double> values;
  std::vector<char> dropped;  ///< per value: removed by the step (empty: none)
  std::vector<ReportCut> cuts;
  double level = 0;         ///< a dashed horizontal line at this count (0: none)
  std::string level_label;  ///< e.g. "expected with no signal"
  std::string dropped_label = "dropped by this filter";
  std::string kept_label = "passed";
  std::string caption;
};

/// A labelled horizontal bar: a feature and its score, or a kept feature and its group size.
struct ReportBar {
  std::string name;
  double value = 0;
  double q = std::numeric_limits<double>::quiet_NaN();  ///< shown when not NaN
  std::string raw_value;  ///< value as the output file writes it (data attribute, for checks)
  std::string raw_q;
  std::string hover;  ///< extra text for the bar's tooltip
  /// The value printed at the bar's end and in its tooltip when not NaN: the signed r or rho of
  /// pearson and spearman, whose bar is |r| (`value`).
  double shown = std::numeric_limits<double>::quiet_NaN();
  /// Against a continuous target: the feature's Pearson r and Spearman rho (NaN: none).
  double pearson_r = std::numeric_limits<double>::quiet_NaN();
  double spearman_rho = std::numeric_limits<double>::quiet_NaN();
};

/// The leading features by the ranking criterion.
struct ReportRanking {
  std::string criterion;   ///< e.g. "mi"
  std::string column;      ///< its ranking.tsv column
  std::string q_column;    ///< the q-value column shown, or empty
  std::string axis;        ///< e.g. "mutual information with the class (nats)"
  bool continuous =
      false;  ///< scored against a continuous target (named by label_name), not classes
  std::int64_t total = 0;  ///< features kept (the bars are the first of them)
  std::vector<ReportBar> bars;
  std::string caption;
};

/// The ranking criterion's score against rank, over every ranked feature (kept or not), with the
/// cuts --fdr and --keep make, so a user can choose K.
struct ReportScoreCurve {
  std::string column;                    ///< the score's ranking.tsv / selection-log.tsv column
  std::string q_column;                  ///< the q-value column --fdr filters on, or empty
  std::string axis;                      ///< y axis label, e.g. "mutual information ... (nats)"
  bool absolute = false;                 ///< the values are |column| (pearson_r, spearman_rho)
  std::vector<double> values;            ///< score of every ranked feature, in ranking order
  std::vector<std::int64_t> kept_ranks;  ///< ranks (1-based positions in `values`) of the kept
  double fdr = 1;                        ///< --fdr Q (1: no cut)
  std::int64_t fdr_passed = 0;           ///< ranked features with q <= Q
  std::int64_t fdr_rank = 0;             ///< rank of the last of them (0: none)
  std::int64_t keep = 0;                 ///< --keep K (0: no cut)
  std::int64_t keep_rank = 0;            ///< rank of the K-th kept feature (the last when fewer)
};

/// One of the leading features, sample by sample.
struct ReportStrip {
  std::string name;
  std::int64_t column = 0;    ///< its index in the table
  std::vector<float> values;  ///< one per sample of ReportTopFeatures::ids (NaN: not shown)
};

/// Strip plots of the leading kept features, by class; against a continuous target, one scatter
/// plot each of the feature's values (up) against the target (across).
struct ReportTopFeatures {
  std::vector<std::string> ids;
  std::vector<std::string> labels;  ///< one per id ("" = no label: not shown), or empty
  std::vector<double> target;       ///< a continuous target, one per id (NaN: not shown), or empty
  std::string label_name;           ///< of the labels or the target
  std::string values_note;  ///< what the values are, a phrase shown as a sentence, e.g.
                            ///< "values as in reduced.csv (filled, log2(x + 1))"
  std::vector<ReportStrip> strips;
};

/// Redundancy: how many dropped features each kept feature stood in for.
struct ReportRedundancy {
  double max_corr = 0.9;
  std::int64_t dropped = 0;        ///< features dropped as redundant
  std::int64_t standing = 0;       ///< kept features that stood in for at least one
  std::vector<ReportBar> largest;  ///< value = group size, largest first
};

/// Principal components: explained variance and sample scores.
struct ReportComponents {
  std::string source;         ///< what was analysed, in words
  std::vector<double> ratio;  ///< per component, a share in [0, 1]
  std::vector<double> cumulative;
  std::vector<std::vector<double>> scores;  ///< per component, one score per sample analysed
  std::vector<std::size_t> sample_of;  ///< per score row: its index in ReportSamples (empty: same)
  std::string note;                    ///< e.g. which samples are not on the plots
  bool of_kept = false;  ///< computed on the kept features (add_components), not the screen's
};

/// The samples: ids, classes, the screen's distances and flags.
struct ReportSamples {
  std::vector<std::string> ids;
  std::vector<std::string> labels;  ///< empty: unlabelled; "" = this sample has no label
  /// A continuous target, one per id (NaN: no value), or empty; labels are then empty and the
  /// sample plots are coloured on a light-to-dark ramp of the target.
  std::vector<double> target;
  std::string label_name;          ///< of the labels or the target
  std::string mark_name;           ///< --mark-by COLUMN: the sheet column the plots are also
  std::vector<std::string> marks;  ///< coloured by, one value per id ("" = missing); empty: none
  std::vector<double> missing_rate;
  bool screened = false;
  std::string rule;           ///< screen_rule() text
  std::string screen_source;  ///< what the screening PCA analysed, in words
  std::vector<double> distance;
  std::vector<char> flagged;
  std::vector<char> dropped;  ///< empty: none dropped
  double threshold = 0;
};

/// The run record.
struct ReportInput {
  std::string role;  ///< "data", "sample sheet"
  std::string path;
  std::string sha256;
};

struct ReportRecord {
  std::string version;
  std::vector<std::string> command_line;
  std::vector<ReportInput> inputs;
  std::vector<std::pair<std::string, std::string>> parameters;
  std::vector<std::pair<std::string, double>> timings;  ///< seconds
  std::vector<std::string> outputs;
};

/// Everything the page shows. Empty parts are left out (with a line saying why where useful).
struct ReportData {
  std::string command;  ///< scan, reduce or project
  std::string title;
  std::vector<std::string> glance;  ///< a few sentences at the top
  std::int64_t samples = 0;
  std::int64_t features = 0;
  std::vector<ReportStep> steps;
  std::vector<ReportHistogram> histograms;
  ReportRanking ranking;
  std::string ranking_note;      ///< shown instead of the chart when it has no bars
  ReportScoreCurve score_curve;  ///< empty values: not drawn
  ReportHistogram p_values;      ///< the ranking test's p-values (empty values: not drawn)
  ReportTopFeatures top_features;
  bool chosen_with_labels = false;  ///< the kept features were ranked against the labels
  ReportRedundancy redundancy;
  bool has_redundancy = false;
  ReportComponents components;
  ReportSamples sample_info;
  ReportRecord record;
};

/// The page. Every name is HTML-escaped; the page holds no script and fetches nothing.
std::string report_html(const ReportData& data);

/// Most samples drawn in a scatter plot; past it every k-th sample is drawn (all flagged ones
/// always), and the plot says so.
inline constexpr std::size_t kReportMaxPoints = 2500;

/// Fills the funnel, the missing-rate and variance histograms, the top 30, the score curve, the
/// p-value histogram (supervised) and the redundancy groups from a reduction of `table` (whose
/// names and labels are those the reduction saw).
void add_reduction(ReportData& data, const FeatureTable& table, const Reduction& reduction,
                   const ReduceOptions& options, bool selection);

/// Fills the top 30 bars, the score curve and the p-value histogram of a ranking: `order_all` is
/// every position of `scores` in ranking order (rank_order), `kept` the positions kept, in
/// ranking.tsv order; `fdr` (1: none) and `keep` (0: none) the cuts asked for. add_reduction calls
/// it for a supervised reduction. With scores.continuous (a target), the words, the test and the
/// p-values are those of the target (pearson, spearman; Spearman's test for mi).
void add_ranking(ReportData& data, const FeatureTable& table, const FeatureScores& scores,
                 std::span<const std::size_t> order_all, std::span<const std::size_t> kept,
                 Criterion criterion, double fdr, std::int64_t keep);

/// Strip plots of the features `columns` (indices into table.values; the first 6 are used), one
/// dot per sample, grouped by table.labels (samples with label "" left out and counted; one strip
/// each without labels); with table.target, one scatter plot each against the target instead.
/// The values are copied as they are now, so call it while table.values holds what reduced.csv
/// holds; `values_note` says what that is.
void add_top_features(ReportData& data, const FeatureTable& table,
                      std::span<const std::int64_t> columns, const std::string& values_note);

/// Most features drawn as strip plots, and most dots in each (past it every k-th sample, and the
/// plot says so; the boxes use every sample).
inline constexpr std::size_t kReportTopFeatures = 6;
inline constexpr std::size_t kReportMaxStripPoints = 600;

/// Fills the components part from a projection.
void add_components(ReportData& data, const Projection& projection, const std::string& source);

/// Fills the samples part from the screen of the input (ids and labels, or the continuous
/// `target`, of every input sample; label_name names either). Without components it also draws
/// the screen's own PCA.
void add_screen(ReportData& data, const SampleScreen& screen, const std::vector<std::string>& ids,
                const std::vector<std::string>& labels, const std::string& label_name,
                const std::vector<char>& dropped, const std::vector<double>& target = {});

/// Fills the histograms of a scan from its profile.
void add_profile(ReportData& data, const FeatureTable& table, const Profile& profile);

/// Fills the run record of a reduce or project run: version, command line, inputs with SHA-256,
/// the parameters and outputs as plan.json records them, and the step timings (the sample screen's
/// second).
void add_run_record(ReportData& data, const FeatureTable& table, const PipelineResult& result, const RunRecord& run,
                    const PlanProjection& projection = {});

}  // namespace pare
