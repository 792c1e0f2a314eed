// The built-in demo scenario, invented for pare: a greenhouse drought trial. Seedlings of a crop
// are scored drought-tolerant or drought-sensitive, and leaf transcript abundances are measured.
// The generator plants known structure (informative modules, redundant near-copies, near-constant
// and mostly-missing features, a two-batch shift) and records it, so later steps can report how
// much of it they recover.
#pragma once

#include <cstdint>  // std::uint64_t, std::int64_t
#include <string>   // std::string

namespace pare {

/// Shape of the scenario. The defaults are the documented demo.
struct DemoScenario {
  std::int64_t samples = 240;
  std::int64_t tolerant = 60;          ///< the rest are sensitive (imbalanced on purpose)
  std::int64_t features = 20000;
  std::int64_t modules = 8;            ///< co-regulated modules of informative features
  std::int64_t module_size = 5;        ///< so 40 informative features
  std::int64_t copies = 60;            ///< near-copies (r ~ 0.97) of informative features
  double near_constant_fraction = 0.03;
  std::int64_t mostly_missing = 200;   ///< features with 30-60% missing cells
  double missing_fraction = 0.02;      ///< of all cells, the mostly-missing ones included
  double batch_fraction = 0.25;        ///< background features shifted in batch B
};

/// Paths of the files the demo writes.
struct DemoFiles {
  std::string data;     ///< rows=features matrix, gzip CSV
  std::string samples;  ///< sample sheet: sample, condition, batch
  std::string truth;    ///< planted truth: feature, role, module, copy_of, batch_shift
};

/// Generates the scenario deterministically from `seed` into folder `dir` (created if needed).
DemoFiles write_demo(const std::string& dir, std::uint64_t seed, const DemoScenario& scenario = {});

}  // namespace pare

#include <vector>  // std::vector

#include "pare/matrix.h"
#include "pare/pipeline.h"
#include "pare/reduce.h"

namespace pare {

/// How much of the planted truth a reduction recovered.
struct DemoRecovery {
  std::int64_t informative = 0, informative_kept = 0;   ///< recall = kept / planted
  std::int64_t kept = 0, kept_planted = 0;              ///< precision = planted among kept
  std::int64_t copies = 0, copies_redundant = 0;        ///< near-copies dropped as redundant
  std::int64_t copies_named_twin = 0;                   ///< ... naming their original or a module-mate
  std::int64_t near_constant = 0, near_constant_variance = 0;  ///< (near-)constant dropped by variance
  std::int64_t mostly_missing = 0, mostly_missing_missing = 0; ///< mostly-missing dropped by missing
};

/// Compares `reduction` of `table` with the planted truth in `truth_path` (greenhouse-truth.tsv).
DemoRecovery evaluate_demo(const std::string& truth_path, const FeatureTable& table, const Reduction& reduction);

/// The demo's account of what was recovered, line by line: recall and precision of the planted
/// transcripts, the near-copies, constant and mostly-missing ones, and how much of each component
/// (of the screen and of the run's PCA) lies between the batches `batches` (one per sample).
std::string demo_recovery_text(const DemoRecovery& recovery, const std::string& truth_path, const PipelineResult& run,
                               const std::vector<std::string>& batches);

}  // namespace pare
