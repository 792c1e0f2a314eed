// Reading the data of a run: the file, the labels from a sample sheet, the samples of a list, and
// for a supervised run leaving out the samples without a label or of too small a class. What
// deserves a warning is returned as text; the library prints nothing.
#pragma once

#include <cstdint>  // std::int64_t, std::uint64_t
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/io.h"
#include "pare/matrix.h"
#include "pare/plan.h"
#include "pare/samples.h"

namespace pare {

struct DataRequest {
  std::string path;                  ///< the data file
  ReadOptions read;
  std::string labels;                ///< a sample sheet as FILE[:COLUMN] (SheetSpec), or empty
  std::string samples;               ///< a sample list (read_sample_list), or empty
  std::int64_t min_class_size = 0;   ///< supervised: leave out the samples of smaller classes
  bool supervised = false;           ///< leave out unlabelled samples, check the labels
  /// The label column (or the sheet's column) is a continuous target: its values must be numbers;
  /// they move to FeatureTable::target (samples without one are left out when supervised).
  bool target = false;
  std::string mark_by;               ///< a sheet or sample-info column to mark samples by, or empty
  bool hash = true;                  ///< compute the SHA-256 of every input (while reading)
};

struct LoadedData {
  FeatureTable table;                ///< restricted to the samples used
  std::int64_t samples_read = 0;     ///< samples in the file
  SamplesLeftOut left_out;           ///< unlabelled / small classes (supervised)
  std::vector<std::string> marks;    ///< mark_by values, one per sample of `table` (or empty)
  std::vector<std::string> warnings; ///< one line each, e.g. classes of fewer than 3 samples
  std::string data_sha256, sheet_sha256, sample_list_sha256;  ///< with hash
  std::string sheet_path;            ///< the sheet's path without :COLUMN, or empty
  double seconds = 0;                ///< reading, wall time
};

/// Reads `request.path` (and the sheet first: its mistakes show before a long read), attaches the
/// labels, keeps the listed samples and, when supervised, leaves out those without a label or of
/// classes under min_class_size (with `target`: those without a target value). Throws
/// Error(kInput) when a supervised run is left without a labelled sample, and with `target` on a
/// value that is not a finite number, or a target with fewer than 3 samples or one value.
LoadedData load_data(const DataRequest& request);

/// Throws Error(kInput), naming the file the labels came from, when `table` has labels of fewer
/// than 2 classes: scoring against them means nothing.
void require_two_classes(const FeatureTable& table);

/// The run record of a run on `loaded` (inputs with their SHA-256, reading options, the samples
/// used and left out, the marks): what plan.json and the report record besides the result.
RunRecord run_record(const DataRequest& request, const LoadedData& loaded, std::vector<std::string> command_line,
                     std::uint64_t seed);

/// "rows=samples" or "rows=features".
const char* layout_name(Layout layout);

}  // namespace pare
