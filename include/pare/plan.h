// plan.json: the record of a reduction run and everything `apply` needs to replay it on new
// samples without refitting (kept names in order, fill values, transform, centre and scale).
#pragma once

#include <cstdint>  // std::int64_t, std::uint64_t
#include <optional>  // std::optional
#include <memory>   // std::shared_ptr
#include <string>   // std::string
#include <utility>  // std::pair
#include <vector>   // std::vector

#include "pare/io.h"
#include "pare/clean.h"
#include "pare/impute.h"
#include "pare/matrix.h"
#include "pare/pipeline.h"
#include "pare/projection.h"
#include "pare/reduce.h"
#include "pare/samples.h"

namespace pare {

/// The split of a `pare folds` run a reduction was fitted on (plan.json's samples.fold).
struct SplitRecord {
  std::int64_t repeat = 0, fold = 0;    ///< counted from 1: the fold held out, in this repeat
  std::int64_t folds = 0, repeats = 0;
  std::string assignment;               ///< how samples were dealt (FoldAssignment::scheme)
  std::string groups;                   ///< the group column, or empty
  std::int64_t held_out = 0;            ///< samples held out
  std::string training_samples;         ///< the file listing the training ids, beside the plan
};

/// Facts about the run that are not part of the reduction itself.
struct RunRecord {
  std::vector<std::string> command_line;  ///< the full command line, program name first
  std::string input_path;
  std::string input_sha256;
  std::string sheet_path;                 ///< empty when labels did not come from a sheet
  std::string sheet_sha256;
  std::string sheet_column;
  std::string label;                      ///< --label, or empty
  bool target = false;                   ///< `label` is a continuous target's column
  std::vector<std::string> na_tokens;
  bool allow_inf = false;
  std::uint64_t seed = 1;
  std::vector<std::string> feature_info;  ///< --feature-info columns
  std::vector<std::string> sample_info;   ///< --sample-info columns
  std::int64_t samples_read = 0;          ///< samples in the data file
  std::string sample_list_path;           ///< --samples FILE, or empty
  std::string sample_list_sha256;
  SamplesLeftOut left_out;                ///< samples left out of a supervised run, and why
  double read_seconds = 0;                ///< reading the inputs, wall time
  std::string mark_name;                  ///< the column samples are marked by in the report, or empty
  std::vector<std::string> marks;         ///< its value per sample used (or empty)
  std::optional<SplitRecord> split;       ///< a split of `pare folds`, or none
  double subsample = 0;                   ///< --subsample as given (0: none)
  std::vector<std::string> subsample_ids; ///< the samples it drew
};

/// Where a run's projection was written: plan.json names the loadings file and its SHA-256.
struct PlanProjection {
  std::string loadings_file = "loadings.tsv";  ///< file name next to plan.json
  std::string loadings_sha256;
  std::string impute_reference_file = "impute-reference.npy";  ///< --impute knn: the training values
  std::string impute_reference_sha256;
};

/// A plan as loaded from plan.json.
struct Plan {
  std::string path;
  std::string layout;
  char delimiter = ',';
  std::string label;
  bool target = false;                   ///< `label` names a continuous target
  std::vector<std::string> na_tokens;
  bool allow_inf = false;
  std::vector<std::string> feature_info, sample_info;  ///< annotation columns of the input
  bool log2 = false;
  bool scale = false;
  std::vector<std::string> names;  ///< kept features in order
  std::vector<float> fill;         ///< raw-scale fill value per kept feature
  std::vector<double> center, spread;
  // Projection (empty when the plan has none).
  std::int64_t components = 0;
  Eigen::VectorXd pca_center, pca_scale;
  Eigen::MatrixXd loadings;  ///< read from the loadings file, its SHA-256 checked
  /// --impute knn: the training values gaps are filled from (read from the plan's reference file,
  /// its SHA-256 checked); null otherwise.
  std::shared_ptr<const KnnReference> knn;
  /// --normalize: each new sample normalised over these features (by name) before anything else;
  /// quantile: onto this reference.
  Normalize normalize = Normalize::kNone;
  std::vector<std::string> normalized_features;
  std::vector<double> quantile_reference;
};

/// The plan.json text of a finished run on `table` (as the run left it: names, delimiter, the
/// samples used): the run record, the options, the steps, the kept features with what apply needs
/// to replay them, the sample screen and, with a projection, the loadings' file and hash.
std::string plan_json(const FeatureTable& table, const PipelineResult& result, const RunRecord& run,
                      const PlanProjection& projection = {});

/// Loads and checks plan.json (and its loadings file, whose SHA-256 must match). Throws
/// Error(kInput) naming the file and the field on any problem.
Plan load_plan(const std::string& path);

/// What apply did.
struct ApplyReport {
  std::vector<std::string> absent;      ///< plan features not in the new data (filled entirely)
  std::vector<std::int64_t> filled;     ///< per kept feature: cells filled with the training value
  std::int64_t extra = 0;               ///< features of the new data the plan does not use
};

/// Replays `plan` on `data`: selects the plan's features by name, fills gaps with the training
/// fill values, applies the same transform. Returns the reduced table (plan order, the data's ids,
/// labels, layout and delimiter). Features absent from `data` are an error listing how many and
/// the first ten, unless `allow_missing` (then they are filled with the training value).
FeatureTable apply_plan(const Plan& plan, const FeatureTable& data, bool allow_missing,
                        ApplyReport& report, int threads = 0);

}  // namespace pare
