// Matrix products through the dispatched kernels (src/kernels/kernels.h), split into fixed-size
// pieces computed in parallel. Every entry is one kernel sum in a fixed order, so the result is
// the same bits whatever --threads is and whichever instruction-set level runs.
#pragma once

#include <algorithm>  // std::min

#include <Eigen/Core>

#include "kernels/kernels.h"

namespace pare::internal {

/// Rows (or columns) per piece.
inline constexpr Eigen::Index kProductPiece = 256;

/// C = A^T B (A n x p, B n x l, C p x l, all column-major float), in pieces of A's columns.
template <typename MatA, typename MatB, typename MatC>
void product_tn(const MatA& a, const MatB& b, MatC& c, int threads) {
  const Eigen::Index p = a.cols(), n = a.rows(), l = b.cols();
  if (c.rows() != p || c.cols() != l) c.resize(p, l);
  const Eigen::Index pieces = (p + kProductPiece - 1) / kProductPiece;
  const float* a_data = a.data();
  const Eigen::Index lda = a.outerStride();
  const kernels::Operand right = kernels::columns(b.data(), b.outerStride());
  float* c_data = c.data();
  const Eigen::Index ldc = c.outerStride();
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (Eigen::Index k = 0; k < pieces; ++k) {
    const Eigen::Index start = k * kProductPiece, width = std::min(kProductPiece, p - start);
    kernels::gemm(kernels::Shape{width, l, n},
                  kernels::transposed(kernels::columns(a_data + start * lda, lda)), right,
                  c_data + start, ldc, false);
  }
}

}  // namespace pare::internal
