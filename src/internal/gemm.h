// Matrix products split into fixed-size pieces computed in parallel, each piece by one thread with
// Eigen's single-threaded kernel. Eigen's own parallel product sizes its cache blocks by the
// thread count, which changes the order of the sums and so the last bits of the result; with fixed
// pieces every entry is computed the same way whatever --threads is.
#pragma once

#include <Eigen/Core>

#include <algorithm>  // std::min

namespace pare::internal {

/// Rows (or columns) per piece.
inline constexpr Eigen::Index kProductPiece = 256;

/// C = A^T B (A n x p, B n x l, C p x l), in pieces of A's columns.
template <typename MatA, typename MatB, typename MatC>
void product_tn(const MatA& a, const MatB& b, MatC& c, int threads) {
  const Eigen::Index p = a.cols();
  if (c.rows() != p || c.cols() != b.cols()) c.resize(p, b.cols());
  const Eigen::Index pieces = (p + kProductPiece - 1) / kProductPiece;
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (Eigen::Index k = 0; k < pieces; ++k) {
    const Eigen::Index start = k * kProductPiece, width = std::min(kProductPiece, p - start);
    c.middleRows(start, width).noalias() = a.middleCols(start, width).transpose() * b;
  }
}

/// C = A B (A n x p, B p x l, C n x l), in pieces of A's rows.
template <typename MatA, typename MatB, typename MatC>
void product_nn(const MatA& a, const MatB& b, MatC& c, int threads) {
  const Eigen::Index n = a.rows();
  if (c.rows() != n || c.cols() != b.cols()) c.resize(n, b.cols());
  const Eigen::Index pieces = (n + kProductPiece - 1) / kProductPiece;
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (Eigen::Index k = 0; k < pieces; ++k) {
    const Eigen::Index start = k * kProductPiece, height = std::min(kProductPiece, n - start);
    c.middleRows(start, height).noalias() = a.middleRows(start, height) * b;
  }
}

}  // namespace pare::internal
