// Writing a run into a folder: every file under a temporary name, all renamed into place together
// once complete, so a failed run leaves none under a final name; and the summary of a run in
// words, as the command line prints it.
#pragma once

#include <memory>       // std::unique_ptr
#include <string>       // std::string
#include <string_view>  // std::string_view
#include <vector>       // std::vector

#include "pare/io.h"
#include "pare/pipeline.h"
#include "pare/plan.h"
#include "pare/profile.h"
#include "pare/ranking.h"

namespace pare {

/// The output files of a run in one folder.
class OutputSet {
 public:
  /// Creates `dir` when needed. No output may be one of `inputs` (Error(kOutput)).
  OutputSet(std::string dir, std::vector<std::string> inputs);

  void add(const std::string& name, std::string_view content);
  /// Opens `name` for writing in pieces; it is renamed into place by commit() with the others.
  OutputFile& open(const std::string& name);
  void commit();
  std::string path(const std::string& name) const;

 private:
  std::string dir_;
  std::vector<std::string> inputs_;
  std::vector<std::unique_ptr<OutputFile>> files_;
};

/// Runs the pipeline on `table` and writes its files into `dir`: with options.select
/// ranking.tsv, selection-log.tsv and the reduced matrix; with a projection scores.csv,
/// loadings.tsv and explained.tsv; always plan.json, samples.tsv and report.html. The text
/// outputs are built while the projection runs (one at a time first under a memory budget).
PipelineResult reduce_to_folder(FeatureTable& table, const PipelineOptions& options, const RunRecord& run,
                                const std::string& dir);

/// What apply_to_folder did.
struct ApplyResult {
  ApplyReport report;
  std::string reduced_file;  ///< its name in the folder
  bool samples_file = false; ///< samples.tsv written (the data had labels or sample-info columns)
};

/// Replays `plan` on `data` (apply_plan) and writes into `dir`: the reduced matrix, apply-log.tsv
/// (per plan feature: present or absent, cells filled), samples.tsv when the data has labels or
/// sample-info columns, and scores.csv when the plan has a projection.
ApplyResult apply_to_folder(const Plan& plan, const FeatureTable& data, bool allow_missing, const std::string& dir,
                            std::vector<std::string> inputs, int threads = 0);

/// What `pare apply` prints after such a run.
std::string apply_summary(const Plan& plan, const FeatureTable& data, const ApplyResult& applied,
                          const std::string& dir);

/// A scan: the profile of every feature and the sample screen.
struct ScanResult {
  Profile profile;
  SampleScreen screen;
};

/// Profiles `table` and screens its samples (on log2(x + 1) with `log2`; a negative value is then
/// Error(kInput)); writes profile.tsv, samples.tsv and report.html into `dir`.
ScanResult scan_to_folder(const FeatureTable& table, bool log2, const RunRecord& run, const std::string& dir,
                          int threads = 0);

/// What `pare scan` prints after such a run.
std::string scan_summary(const FeatureTable& table, const ScanResult& scan, const RunRecord& run,
                         const std::string& dir);

/// What to rank by and where to cut.
struct RankOptions {
  Criterion criterion = Criterion::kMi;
  double fdr = 1;          ///< keep q <= fdr for the criterion's test (1: no cut)
  std::int64_t keep = 0;   ///< keep the first K (0: all)
  bool log2 = false;       ///< score log2(x + 1) of the values
  ScoreOptions score;
};

/// Checks the values of `options` before any data is read. Throws Error(kUsage).
void check_rank_options(const RankOptions& options);

struct RankResult {
  FeatureScores scores;
  std::vector<std::size_t> ranked;  ///< every position of `scores`, best first
  std::vector<std::size_t> kept;    ///< the positions written, in order
  std::int64_t passing = 0;         ///< features with q <= fdr
  double seconds = 0;               ///< scoring
};

/// Scores every feature of `table` against its labels (at least two classes), ranks them and
/// writes ranking.tsv and report.html into `dir`. The table's values are log2-transformed in place
/// with options.log2. Throws Error(kInput) when no feature can be scored or none passes --fdr.
RankResult rank_to_folder(FeatureTable& table, const RankOptions& options, const RunRecord& run,
                          const std::string& dir, int threads = 0);

/// What `pare rank` prints after such a run.
std::string rank_summary(const FeatureTable& table, const RankOptions& options, const RankResult& rank,
                         const RunRecord& run, const std::string& dir);

/// What `pare reduce` / `pare project` print after such a run, line by line.
std::string reduce_summary(const FeatureTable& table, const PipelineResult& result, const RunRecord& run,
                           const std::string& dir);

/// The line on the samples used, when some were left out ("" when none were): how many of the
/// file's, and why (a sample list, missing labels, small classes, a --subsample of that size).
std::string left_out_summary(const SamplesLeftOut& left, std::int64_t samples_read, std::int64_t samples_used,
                             const std::string& sample_list, double subsample = 0);

/// The line on the sample screen: how many samples were flagged (and dropped), and which.
std::string screen_summary(const SampleScreen& screen, const std::vector<std::string>& ids,
                           const std::vector<char>& dropped, const std::string& label = "  samples: ");

/// The classes of `table` and their sample counts, e.g. "condition - sensitive 180, tolerant 60".
std::string class_counts_text(const FeatureTable& table);

/// The target of `table` in a few numbers, e.g. "age - 442 values from 19 to 79, median 50".
std::string target_text(const FeatureTable& table);

/// "  classes: ...\n" or "  target: ...\n" for the summaries ("" without either).
std::string response_line(const FeatureTable& table);

/// What stability selection did, in two lines for a person: the subsets, how many features were
/// kept often enough, `kept` after pruning, and the bound on false selections.
std::string stability_text(const StabilityRecord& stability, std::int64_t kept);

/// `dir`/`name`, or just `name` when dir is ".".
std::string join_path(const std::string& dir, const std::string& name);

}  // namespace pare
