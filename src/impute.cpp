// Nearest-neighbour imputation (include/pare/impute.h).
//
// The distances of a block of rows to every reference row come from four matrix products over
// chunks of the features, in double, with the values zero-filled and M the masks of observed
// values: Σ_common (x − r)² = X²·M_Rᵀ + M_X·R²ᵀ − 2·X·Rᵀ, and the count of common features M_X·M_Rᵀ
// (the expansion scikit-learn's nan_euclidean_distances uses). Each output row is one product of
// a fixed 32-row slice, so the bits do not depend on the thread count. Per row, the reference rows
// are sorted by distance once; each gap then takes the first k of them that observe its feature.
#include "pare/impute.h"

#include <algorithm>  // std::sort, std::min, std::max
#include <cmath>      // std::isnan
#include <cerrno>     // errno
#include <cstring>    // std::memcpy, std::strerror
#include <fstream>    // std::ifstream
#include <limits>     // std::numeric_limits

#include <Eigen/Dense>

#include "internal/omp.h"
#include "pare/error.h"
#include "pare/io.h"

namespace pare {

namespace {

constexpr Eigen::Index kChunk = 256;      // features per product
constexpr Eigen::Index kSlice = 128;      // rows per product
constexpr std::size_t kBlockBytes = std::size_t{256} << 20;

using MatD = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic>;

// Values (zero where missing), their squares and the mask of one side, features [c0, c0 + w).
struct Side {
  MatD v, v2, m;
  void resize(Eigen::Index rows, Eigen::Index w) {
    v.setZero(rows, w);
    v2.setZero(rows, w);
    m.setZero(rows, w);
  }
  void set(Eigen::Index i, Eigen::Index f, float value) {
    if (std::isnan(value)) return;
    const auto d = static_cast<double>(value);
    v(i, f) = d;
    v2(i, f) = d * d;
    m(i, f) = 1;
  }
};

// For the rows `rows` of `x`: in d the sums Σ_common (x − r)² and in common the counts of common
// features, against every reference row (rows.size() x reference rows).
void block_distances(const ConstMatrixRef& x, std::span<const std::int64_t> x_columns, const KnnReference& ref,
                     std::span<const std::int64_t> rows, int threads, MatD& d, MatD& common) {
  const Eigen::Index m = ref.values.rows(), p = ref.values.cols(), b = static_cast<Eigen::Index>(rows.size());
  d = MatD::Zero(b, m);
  common = MatD::Zero(b, m);
  Side r_side, x_side;
  for (Eigen::Index c0 = 0; c0 < p; c0 += kChunk) {
    const Eigen::Index w = std::min(kChunk, p - c0);
    r_side.resize(m, w);
    x_side.resize(b, w);
    for (Eigen::Index f = 0; f < w; ++f) {
      for (Eigen::Index s = 0; s < m; ++s) r_side.set(s, f, ref.values(s, c0 + f));
      const std::int64_t xc = x_columns[static_cast<std::size_t>(c0 + f)];
      if (xc < 0) continue;
      const float* col = x.col(xc).data();
      for (Eigen::Index i = 0; i < b; ++i) x_side.set(i, f, col[rows[static_cast<std::size_t>(i)]]);
    }
    const Eigen::Index slices = (b + kSlice - 1) / kSlice;
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
    for (Eigen::Index s = 0; s < slices; ++s) {
      const Eigen::Index at = s * kSlice, h = std::min(kSlice, b - at);
      d.middleRows(at, h).noalias() += x_side.v2.middleRows(at, h) * r_side.m.transpose();
      d.middleRows(at, h).noalias() += x_side.m.middleRows(at, h) * r_side.v2.transpose();
      d.middleRows(at, h).noalias() -= 2.0 * (x_side.v.middleRows(at, h) * r_side.v.transpose());
      common.middleRows(at, h).noalias() += x_side.m.middleRows(at, h) * r_side.m.transpose();
    }
  }
}

}  // namespace

std::vector<CellFills> knn_fills(const ConstMatrixRef& x, std::span<const std::int64_t> x_columns,
                                 const KnnReference& ref, std::span<const std::int64_t> fill,
                                 std::span<const std::int64_t> fill_feature, std::span<const float> fallback,
                                 bool same_rows, int threads_asked) {
  const Eigen::Index m = ref.values.rows();
  const auto p = static_cast<Eigen::Index>(ref.features.size());
  if (static_cast<Eigen::Index>(x_columns.size()) != p || ref.values.cols() != p || fill.size() != fill_feature.size() ||
      fill.size() != fallback.size())
    throw Error(ErrorKind::kOther, "internal: knn_fills needs one column per reference feature and one fallback per fill");
  const int threads = internal::thread_count(threads_asked);
  const auto k = static_cast<std::size_t>(std::max(1, ref.neighbors));
  // The rows with a gap to fill, and the gaps of each (fill positions, ascending).
  std::vector<std::vector<std::int32_t>> gaps(static_cast<std::size_t>(x.rows()));
  for (std::size_t c = 0; c < fill.size(); ++c) {
    const float* col = x.col(fill[c]).data();
    for (Eigen::Index i = 0; i < x.rows(); ++i)
      if (std::isnan(col[i])) gaps[static_cast<std::size_t>(i)].push_back(static_cast<std::int32_t>(c));
  }
  // In row order, so each column's fills come out with rows ascending.
  std::vector<std::int64_t> receivers;
  for (Eigen::Index i = 0; i < x.rows(); ++i)
    if (!gaps[static_cast<std::size_t>(i)].empty()) receivers.push_back(i);
  const std::span<const std::int64_t> rows(receivers);
  std::vector<CellFills> out(fill.size());
  const auto block = static_cast<Eigen::Index>(
      std::max<std::size_t>(kSlice, kBlockBytes / (16 * static_cast<std::size_t>(std::max<Eigen::Index>(m, 1)))));
  std::vector<std::vector<std::pair<std::int32_t, float>>> found;
  for (std::size_t first = 0; first < receivers.size(); first += static_cast<std::size_t>(block)) {
    const auto b = static_cast<Eigen::Index>(std::min<std::size_t>(static_cast<std::size_t>(block), receivers.size() - first));
    MatD d, common;
    block_distances(x, x_columns, ref, rows.subspan(first, static_cast<std::size_t>(b)), threads, d, common);
    found.assign(static_cast<std::size_t>(b), {});
#pragma omp parallel num_threads(threads)
    {
      std::vector<std::pair<double, std::int64_t>> order;
#pragma omp for schedule(dynamic, 4)
      for (Eigen::Index i = 0; i < b; ++i) {
        const std::int64_t row = receivers[first + static_cast<std::size_t>(i)];
        order.clear();
        for (Eigen::Index s = 0; s < m; ++s) {
          const double n_common = common(i, s);
          if (n_common <= 0 || (same_rows && s == row)) continue;
          const double sum = std::max(0.0, d(i, s));
          order.emplace_back(sum * static_cast<double>(p) / n_common, s);
        }
        std::sort(order.begin(), order.end());
        for (const std::int32_t c : gaps[static_cast<std::size_t>(row)]) {
          const auto f = static_cast<Eigen::Index>(fill_feature[static_cast<std::size_t>(c)]);
          double sum = 0;
          std::size_t count = 0;
          for (const auto& [dist, s] : order) {
            const float v = ref.values(s, f);
            if (std::isnan(v)) continue;
            sum += static_cast<double>(v);
            if (++count == k) break;
          }
          const float value = count > 0 ? static_cast<float>(sum / static_cast<double>(count))
                                        : fallback[static_cast<std::size_t>(c)];
          found[static_cast<std::size_t>(i)].emplace_back(c, value);
        }
      }
    }
    for (Eigen::Index i = 0; i < b; ++i) {
      const std::int64_t row = receivers[first + static_cast<std::size_t>(i)];
      for (const auto& [c, value] : found[static_cast<std::size_t>(i)]) out[static_cast<std::size_t>(c)].emplace_back(row, value);
    }
  }
  return out;
}

void write_knn_reference_npy(const KnnReference& ref, const std::function<void(std::string_view)>& sink) {
  const Eigen::Index n = ref.values.rows(), p = ref.values.cols();
  std::string header = "{'descr': '<f4', 'fortran_order': False, 'shape': (" + std::to_string(n) + ", " +
                       std::to_string(p) + "), }";
  // magic (6) + version (2) + length (2) + header, padded with spaces to a multiple of 64, ending in \n
  const std::size_t total = (10 + header.size() + 1 + 63) / 64 * 64;
  header.append(total - 10 - header.size() - 1, ' ');
  header += '\n';
  std::string out("\x93NUMPY\x01\x00", 8);
  out += static_cast<char>(header.size() & 0xFF);
  out += static_cast<char>((header.size() >> 8) & 0xFF);
  out += header;
  sink(out);
  // Rows of samples, gathered from the column-major values a megabyte at a time.
  const Eigen::Index rows_per_piece = std::max<Eigen::Index>(1, (Eigen::Index{1} << 20) / std::max<Eigen::Index>(4 * p, 1));
  std::string piece;
  for (Eigen::Index i0 = 0; i0 < n; i0 += rows_per_piece) {
    const Eigen::Index rows = std::min(rows_per_piece, n - i0);
    piece.resize(static_cast<std::size_t>(rows * p) * sizeof(float));
    char* to = piece.data();
    for (Eigen::Index i = i0; i < i0 + rows; ++i)
      for (Eigen::Index j = 0; j < p; ++j, to += sizeof(float)) {
        const float v = ref.values(i, j);
        std::memcpy(to, &v, sizeof v);  // x86-64 and aarch64 Debian: little-endian
      }
    sink(piece);
  }
}

Matrix read_knn_reference_npy(const std::string& path, std::int64_t rows, std::int64_t cols) {
  const auto bad = [&](const std::string& what) -> Matrix {
    throw_input_error({path}, what, "keep the impute reference pare wrote beside its plan, unchanged");
  };
  std::ifstream in(path, std::ios::binary);
  if (!in) throw Error(ErrorKind::kInput, path + ": cannot be read (" + std::strerror(errno) + ")");
  char start[10];
  if (!in.read(start, sizeof start) || std::string_view(start, 6) != std::string_view("\x93NUMPY", 6) || start[6] != 1)
    return bad("not a .npy file of version 1");
  const std::size_t length = static_cast<unsigned char>(start[8]) | (static_cast<std::size_t>(static_cast<unsigned char>(start[9])) << 8);
  std::string header(length, '\0');
  if (!in.read(header.data(), static_cast<std::streamsize>(length))) return bad("a truncated .npy header");
  const std::string shape = "'shape': (" + std::to_string(rows) + ", " + std::to_string(cols) + ")";
  if (header.find("'descr': '<f4'") == std::string::npos || header.find("'fortran_order': False") == std::string::npos ||
      header.find(shape) == std::string::npos)
    return bad("not float32 values of shape (" + std::to_string(rows) + ", " + std::to_string(cols) + ")");
  // Row by row (the file is C order) into the column-major matrix.
  Matrix values(rows, cols);
  std::vector<float> row(static_cast<std::size_t>(cols));
  for (std::int64_t i = 0; i < rows; ++i) {
    if (!in.read(reinterpret_cast<char*>(row.data()), static_cast<std::streamsize>(row.size() * sizeof(float))))
      return bad("the data size does not match its header");
    for (std::int64_t j = 0; j < cols; ++j) values(i, j) = row[static_cast<std::size_t>(j)];
  }
  if (in.peek() != std::char_traits<char>::eof()) return bad("the data size does not match its header");
  return values;
}

}  // namespace pare
