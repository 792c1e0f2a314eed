// Fold-wise selection: the samples dealt into K folds (R times over), and for each split the
// reduction run on the training samples alone and replayed on the held-out ones, so an accuracy
// measured on held-out samples is not inflated by features chosen with their help.
#pragma once

#include <cstdint>  // std::int64_t, std::uint64_t
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/load.h"
#include "pare/matrix.h"
#include "pare/pipeline.h"

namespace pare {

struct FoldOptions {
  std::int64_t folds = 5;    ///< K, 2 or more
  std::int64_t repeats = 1;  ///< R, 1 or more: the whole assignment again, dealt afresh
  /// A column of the sample sheet or a --sample-info column: samples sharing a value (a patient,
  /// a batch, a site) are held out together. Empty: no groups.
  std::string groups;
};

/// Throws Error(kUsage) naming `folds` or `repeats` when folds < 2 or repeats < 1.
void check_fold_options(const FoldOptions& options);

/// Which fold holds out each sample, in each repeat.
struct FoldAssignment {
  std::int64_t folds = 0, repeats = 0;
  /// [repeat][sample]: the fold (0-based) that holds the sample out; samples in table order.
  std::vector<std::vector<std::int32_t>> fold;
  std::string scheme;  ///< "stratified by class", "dealt by target", "by group", "random"
};

/// Deals the samples of `table` into options.folds folds, options.repeats times; each repeat
/// draws from its own stream of `seed`. With labels, within each class (classes in name order) the
/// samples are shuffled and dealt round robin, the dealing going on from fold to fold across
/// classes (so each class has floor or ceil of its share in every fold, and fold sizes differ by
/// at most one). With a target, the samples sorted by it (ties in table order) are dealt in
/// consecutive blocks of K, one to each fold in a shuffled order. With `groups` (one per sample),
/// whole groups go to one fold: groups in shuffled order, then largest first, each to the fold
/// with the fewest samples so far (ties: the lower fold). Throws Error(kInput) naming `folds` when
/// K exceeds the samples (or the groups), and naming `groups` when a group value is empty.
FoldAssignment assign_folds(const FeatureTable& table, const FoldOptions& options, std::uint64_t seed,
                            const std::vector<std::string>& groups = {});

/// Checks, before the data is read, that `column` can give the groups: a `sample_info` column of
/// `request`, else a column of its sample sheet (read here). Throws Error(kUsage) when there is
/// neither, Error(kInput) at the sheet's header when the sheet lacks the column.
void check_group_column(const DataRequest& request, const std::string& column);

/// The value of column `column` for each sample of `loaded.table`: a --sample-info column of the
/// data, else a column of the sample sheet of `request` ("" for an empty cell or a missing-value
/// token). Throws Error(kInput) naming `groups` when neither has the column.
std::vector<std::string> sample_groups(const DataRequest& request, const LoadedData& loaded, const std::string& column);

/// One split: trained on every sample outside fold `fold` of repeat `repeat`.
struct FoldSplit {
  std::int64_t repeat = 0, fold = 0;        ///< 1-based
  std::string name;                         ///< "rR-fF", its folder in the output folder
  std::int64_t training = 0, held_out = 0;  ///< samples
  std::int64_t used = 0;                    ///< training samples the reduction used (after leaving out)
  std::vector<std::string> kept;            ///< the kept features, in rank order
  std::vector<std::string> warnings;        ///< e.g. a class of one sample in this training set
};

/// How often a feature was kept across the splits (a line of kept-across-folds.tsv).
struct KeptAcross {
  std::string feature;
  std::int64_t index = 0;     ///< input index, 0-based
  std::int64_t kept_in = 0;   ///< splits that kept it
  double mean_rank = 0;       ///< its mean rank (1 = first) over those splits
};

struct FoldsResult {
  FoldAssignment assignment;
  std::vector<FoldSplit> splits;  ///< repeat by repeat, fold by fold
  /// Every feature kept at least once: kept_in descending, then mean_rank ascending, then input order.
  std::vector<KeptAcross> across;
  std::string groups;             ///< the group column, or empty
  std::int64_t group_count = 0;   ///< distinct groups
};

/// For each repeat r and fold f of assign_folds: runs reduce_to_folder on the samples outside the
/// fold alone (what `reduce` does with those samples as its sample list: the samples are
/// restricted first, then, when supervised, those of classes under min_class_size are left out)
/// into DIR/rR-fF/, writing the training ids beside it as training-samples.txt (the plan's sample
/// list, with its SHA-256, and the plan's samples.fold naming the split), then applies that plan
/// to the held-out samples into DIR/rR-fF/held-out/. Then writes DIR/folds.tsv (sample, repeat,
/// fold; counted from 1) and DIR/kept-across-folds.tsv. Splits run one at a time, each on a copy of
/// its samples' rows, freed before the next. Every split is written into a hidden folder and
/// moved into place only once all have finished, so a failed run leaves no split under a final
/// name. `loaded` is the data as load_data returned it for `request` (supervised, without a sample
/// list); `options` as for reduce_to_folder.
FoldsResult folds_to_folder(const DataRequest& request, const LoadedData& loaded, const PipelineOptions& options,
                            const FoldOptions& folds, const std::vector<std::string>& command_line,
                            const std::string& dir);

/// folds.tsv of an assignment: `sample, repeat, fold` (from 1), repeat by repeat, samples in order.
std::string folds_tsv(const std::vector<std::string>& sample_ids, const FoldAssignment& assignment);

/// kept-across-folds.tsv: `feature, kept_in, splits, fraction, mean_rank`.
std::string kept_across_tsv(const std::vector<KeptAcross>& across, std::int64_t splits);

/// What `pare folds` prints after such a run.
std::string folds_summary(const LoadedData& loaded, const FoldsResult& result, const std::string& dir);

}  // namespace pare
