// report.html: one self-contained page (inline CSS and SVG, no script, nothing fetched) that shows
// what a run did: the selection funnel, where the filters cut the distributions, the leading
// features, redundancy, the components and the samples on them, and the run record.
// report_html is a pure function of plain data; the add_* helpers fill that data from a run.
#pragma once

#include <cstdint>  // std::int64_t
#include <limits>   // std::numeric_limits
#include <string>   // std::string
#include <utility>  // std::pair
#include <vector>   // std::vector

#include "pare/matrix.h"
#include "pare/outliers.h"
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
};

/// The leading features by the ranking criterion.
struct ReportRanking {
  std::string criterion;   ///< e.g. "mi"
  std::string column;      ///< its ranking.tsv column
  std::string q_column;    ///< the q-value column shown, or empty
  std::string axis;        ///< e.g. "mutual information with the class (nats)"
  std::int64_t total = 0;  ///< features kept (the bars are the first of them)
  std::vector<ReportBar> bars;
  std::string caption;
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
};

/// The samples: ids, classes, the screen's distances and flags.
struct ReportSamples {
  std::vector<std::string> ids;
  std::vector<std::string> labels;  ///< empty: unlabelled
  std::string label_name;
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
  std::string ranking_note;  ///< shown instead of the chart when it has no bars
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

/// Fills the funnel, the missing-rate and variance histograms, the top 30 and the redundancy
/// groups from a reduction of `table` (whose names and labels are those the reduction saw).
void add_reduction(ReportData& data, const FeatureTable& table, const Reduction& reduction,
                   const ReduceOptions& options, bool selection);

/// Fills the components part from a projection.
void add_components(ReportData& data, const Projection& projection, const std::string& source);

/// Fills the samples part from the screen of the input (ids and labels of every input sample).
/// Without components it also draws the screen's own PCA.
void add_screen(ReportData& data, const SampleScreen& screen, const std::vector<std::string>& ids,
                const std::vector<std::string>& labels, const std::string& label_name,
                const std::vector<char>& dropped);

/// Fills the histograms of a scan from its profile.
void add_profile(ReportData& data, const FeatureTable& table, const Profile& profile);

/// Fills the run record from plan.json's text: version, command line, inputs with SHA-256,
/// parameters and step timings.
void add_plan_record(ReportData& data, const std::string& plan_json_text);

}  // namespace pare
