// The in-memory form of a data set: a column-major float32 matrix (one contiguous column per
// feature, NaN marks a gap) with feature names, sample ids and optional class labels.
#pragma once

#include <Eigen/Core>

#include <cstdint>  // std::int64_t
#include <memory>   // std::shared_ptr
#include <string>   // std::string
#include <utility>  // std::pair
#include <vector>   // std::vector

namespace pare {

/// Samples are rows, features are columns; storage is column-major so a feature is contiguous.
using Matrix = Eigen::Matrix<float, Eigen::Dynamic, Eigen::Dynamic, Eigen::ColMajor>;

/// A read-only (or writable) view of any column-major float matrix: a Matrix, a Columns, a block.
using MatrixRef = Eigen::Ref<Matrix>;
using ConstMatrixRef = Eigen::Ref<const Matrix>;

/// Where a large matrix may live: in memory while it fits `bytes`, else in a cache file.
struct MemoryBudget {
  std::int64_t bytes = 0;  ///< 0: no budget, everything in memory
  std::string cache_dir;   ///< folder of the cache file (empty: $TMPDIR or /tmp)

  bool fits(std::int64_t need) const { return bytes <= 0 || need <= bytes; }
};

namespace internal {
class ColumnStorage;
}

/// The matrix of a FeatureTable: a column-major float matrix (usable wherever an Eigen matrix
/// is) whose memory is either anonymous memory or, past the memory budget, a file in the cache
/// folder mapped into memory. The file is unlinked as soon as it is mapped, so it disappears
/// with the process whatever way the process ends. Code that walks the columns of a matrix on
/// disk calls internal::release_pages() on what it has finished with, so the resident size stays
/// near the columns in use rather than growing to the whole matrix.
class Columns : public Eigen::Map<Matrix> {
  using Base = Eigen::Map<Matrix>;

 public:
  Columns() : Base(nullptr, 0, 0) {}
  Columns(const Columns& other);  ///< a copy in memory
  Columns& operator=(const Columns& other);
  Columns(Columns&& other) noexcept;
  Columns& operator=(Columns&& other) noexcept;
  ~Columns();

  /// Fresh zeroed storage for n x p values in memory (the previous contents are dropped).
  void resize(Eigen::Index n, Eigen::Index p);
  /// Fresh zeroed storage for n x p values: in memory when 4 n p bytes fit `budget`, else in a
  /// cache file. Throws Error(kOutput) when the cache file cannot be made.
  void allocate(Eigen::Index n, Eigen::Index p, const MemoryBudget& budget);
  /// True when the values live in a cache file.
  bool on_disk() const;
  /// Drops every resident page of a matrix on disk (its content stays in the file).
  void release_all() const;

  template <typename Derived>
  Columns& operator=(const Eigen::DenseBase<Derived>& other) {
    Base::operator=(other);
    return *this;
  }

 private:
  void reseat(float* data, Eigen::Index n, Eigen::Index p);
  std::shared_ptr<internal::ColumnStorage> storage_;
};

/// How a delimited file is laid out.
enum class Layout {
  kRowsAreSamples,   ///< one sample per line, first column the sample id (`rows=samples`)
  kRowsAreFeatures,  ///< one feature per line, first column the feature id (`rows=features`)
};

/// A data set as read from a file.
struct FeatureTable {
  Columns values;                          ///< n_samples x n_features, NaN = missing
  std::vector<std::string> feature_names;  ///< one per column of `values`
  std::vector<std::string> sample_ids;     ///< one per row of `values`
  std::vector<std::string> labels;         ///< one per sample ("" = no label), or empty when unlabelled
  /// A continuous target, one value per sample (load_data with DataRequest::target moves the label
  /// column here, leaving `labels` empty), or empty. Finite in a supervised run; NaN marks a
  /// sample without a value elsewhere (a projection coloured by the target).
  std::vector<double> target;
  std::string label_name;                  ///< the label (or target) column's name, or empty
  std::string id_name;                     ///< the header of the id column, or empty
  std::string source;                      ///< the path it was read from
  std::string labels_source;               ///< the sample sheet the labels came from (empty: `source`)
  char delimiter = ',';                    ///< the delimiter the file used
  Layout layout = Layout::kRowsAreSamples;
  /// Text columns carried with the features (rows=features --feature-info): the column names, and
  /// per column one value per feature.
  std::vector<std::string> feature_info_names;
  std::vector<std::vector<std::string>> feature_info;  ///< [column][feature]
  /// Text columns carried with the samples (rows=samples --sample-info): [column][sample].
  std::vector<std::string> sample_info_names;
  std::vector<std::vector<std::string>> sample_info;
  /// Features whose name repeated an earlier one and was made unique by the reader (the first
  /// keeps the name, later ones become NAME#2, NAME#3, ..., skipping names already in the file):
  /// (feature index, 0-based in input order; name as written).
  std::vector<std::pair<std::int64_t, std::string>> renamed;

  std::int64_t n_samples() const { return values.rows(); }
  std::int64_t n_features() const { return values.cols(); }
  bool has_labels() const { return !labels.empty(); }
  bool has_target() const { return !target.empty(); }
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
