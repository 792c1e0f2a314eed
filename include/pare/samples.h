// Choosing the samples a run uses: a list of sample ids (--samples), samples whose label is
// missing, and samples of classes too small to be scored with confidence (--min-class-size).
// Every sample left out is accounted for, so the summary and the plan can say which and why.
#pragma once

#include <cstdint>  // std::int64_t
#include <span>     // std::span
#include <string>   // std::string
#include <vector>   // std::vector

#include "pare/matrix.h"

namespace pare {

/// A list of sample ids as read from a file (--samples): one id per line, no header; blank
/// lines and lines starting with '#' are ignored; CRLF and a UTF-8 byte-order mark are accepted.
struct SampleList {
  std::string path;
  std::vector<std::string> ids;         ///< in file order
  std::vector<std::int64_t> lines;      ///< 1-based line of each id
};

/// Reads a sample list. Throws Error(kInput) with file:line on a duplicate id, an id that is not
/// valid UTF-8 or holds a NUL byte, or a list with no ids.
SampleList read_sample_list(const std::string& path);

/// Keeps the rows `rows` (ascending, no repeats) of `table`: values, ids, labels and sample-info
/// columns. The new matrix is allocated under `budget` (in a cache file past it).
void keep_samples(FeatureTable& table, std::span<const std::int64_t> rows, const MemoryBudget& budget);

/// Restricts `table` to the samples of `list`, in the table's order. Throws Error(kInput) at the
/// list's file:line for an id that is not a sample of the table (naming the layout when the id
/// is a feature name instead, which means the layout is the other one).
void restrict_to_list(FeatureTable& table, const SampleList& list, const MemoryBudget& budget);

/// Samples a run left out, by reason.
struct SamplesLeftOut {
  std::vector<std::string> unlabelled;   ///< label empty or a missing-value token
  std::vector<std::string> small_class;  ///< in a class with fewer than min_class_size samples
  std::vector<std::string> small_classes;  ///< the classes left out, sorted
  std::int64_t min_class_size = 0;
  bool target = false;  ///< the response is a continuous target: `unlabelled` are the samples without a value
  bool empty() const { return unlabelled.empty() && small_class.empty(); }
};

/// For a supervised run: leaves out the samples without a label and then, when
/// `min_class_size` > 0, the samples of classes with fewer than that many samples. Returns who
/// was left out. A table without labels is left as it is.
SamplesLeftOut leave_out_samples(FeatureTable& table, std::int64_t min_class_size, const MemoryBudget& budget);

/// The classes of `table` with fewer than `below` samples (sorted, with their counts), for a
/// warning: scores are computed for them, but a class of one or two samples says little.
std::vector<std::pair<std::string, std::int64_t>> rare_classes(const FeatureTable& table, std::int64_t below = 3);

}  // namespace pare
