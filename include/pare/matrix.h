// The in-memory form of a data set: a column-major float32 matrix (one contiguous column per
// feature, NaN marks a gap) with feature names, sample ids and optional class labels.
#pragma once

#include <Eigen/Core>

#include <cstdint>  // std::int64_t
#include <string>   // std::string
#include <vector>   // std::vector

namespace pare {

/// Samples are rows, features are columns; storage is column-major so a feature is contiguous.
using Matrix = Eigen::Matrix<float, Eigen::Dynamic, Eigen::Dynamic, Eigen::ColMajor>;

/// How a delimited file is laid out.
enum class Layout {
  kRowsAreSamples,   ///< one sample per line, first column the sample id (`rows=samples`)
  kRowsAreFeatures,  ///< one feature per line, first column the feature id (`rows=features`)
};

/// A data set as read from a file.
struct FeatureTable {
  Matrix values;                           ///< n_samples x n_features, NaN = missing
  std::vector<std::string> feature_names;  ///< one per column of `values`
  std::vector<std::string> sample_ids;     ///< one per row of `values`
  std::vector<std::string> labels;         ///< one per sample, or empty when unlabelled
  std::string label_name;                  ///< the label column's name, or empty
  std::string id_name;                     ///< the header of the id column, or empty
  std::string source;                      ///< the path it was read from
  char delimiter = ',';                    ///< the delimiter the file used
  Layout layout = Layout::kRowsAreSamples;

  std::int64_t n_samples() const { return values.rows(); }
  std::int64_t n_features() const { return values.cols(); }
  bool has_labels() const { return !labels.empty(); }
};

/// Class labels encoded as integers 0..k-1, classes sorted by name so the order never depends on
/// the order of the samples.
struct ClassCodes {
  std::vector<std::string> classes;  ///< sorted class names
  std::vector<int> codes;            ///< one per sample, index into `classes`
  std::vector<std::int64_t> counts;  ///< samples per class
};

/// Encodes `labels` (one string per sample).
ClassCodes encode_classes(const std::vector<std::string>& labels);

}  // namespace pare
