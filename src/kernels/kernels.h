// The hot numeric kernels (matrix products, column statistics, pruning's moments and Pearson r,
// the 8-bit dot product of the pair screen, the eigensolver's plane rotations), compiled once per
// x86-64 level (baseline SSE2, AVX2, AVX-512) and chosen at run time by the processor's features,
// so one binary runs on any x86-64 machine and uses the wide vectors where they exist.
//
// Every kernel does the same arithmetic on every level, so results are the same bits whichever
// runs: sums are taken in a fixed order (a product entry adds its terms one by one in increasing
// k; a statistic sums in 8 interleaved lanes combined in a fixed order), each term is a product
// rounded to the working precision and then added (the level files are compiled with
// -ffp-contract=off, so no fused multiply-add), and only the register tile, which decides which
// entries are computed together but not how, differs between levels. The level files include no
// Eigen and nothing that would emit a shared (weak) symbol: compiled with -march=x86-64-v4, a
// template instantiation could otherwise replace the baseline copy at link time.
#pragma once

#include <cstddef>  // std::ptrdiff_t, std::size_t
#include <cstdint>  // std::int8_t, std::int32_t, std::int64_t

namespace pare::kernels {

/// The instruction-set levels kernels are compiled for (x86-64 psABI levels 1, 3 and 4).
enum class Level { kBaseline = 0, kAvx2 = 1, kAvx512 = 2 };

/// "baseline", "avx2", "avx512".
const char* level_name(Level level);
/// Whether this processor (and the build) can run `level`.
bool level_supported(Level level);
/// The level the kernels run at: the highest supported one unless `force_level` chose another.
Level active_level();
/// Runs the kernels at `level` from now on (for tests and comparisons); an unsupported level is
/// ignored and the call returns false. Not meant to be called while kernels run on other threads.
bool force_level(Level level);
/// Back to the highest supported level.
void reset_level();

/// A matrix operand of a product: element (i, j) is data[i * row_stride + j * col_stride], stored
/// as float or double. With `lower_symmetric` (square operands only) it is the symmetric matrix
/// whose lower triangle is stored: (i, j) with j > i is read at (j, i).
struct Operand {
  const void* data = nullptr;
  bool single = true;  ///< float elements (else double)
  std::ptrdiff_t row_stride = 1;
  std::ptrdiff_t col_stride = 0;
  bool lower_symmetric = false;
};

/// A column-major matrix with leading dimension `ld`.
inline Operand columns(const float* data, std::ptrdiff_t ld) {
  return Operand{data, true, 1, ld, false};
}
inline Operand columns(const double* data, std::ptrdiff_t ld) {
  return Operand{data, false, 1, ld, false};
}
/// The transpose of `o`.
inline Operand transposed(Operand o) {
  const std::ptrdiff_t r = o.row_stride;
  o.row_stride = o.col_stride;
  o.col_stride = r;
  return o;
}

/// Which entries of C a product computes: all, or those with j <= i + diagonal (the lower
/// triangle of a block whose row 0 is row `diagonal` of a symmetric result).
struct Shape {
  std::ptrdiff_t m = 0, n = 0, k = 0;  ///< C is m x n, the sums run over k terms
  bool lower = false;
  std::ptrdiff_t diagonal = 0;
};

/// C (m x n, column-major with leading dimension ldc) = A B, or C + A B with `accumulate`, for
/// A m x k and B k x n. Each computed entry starts from 0 (or its value in C) and adds the k
/// products a_il b_lj, each rounded to float, one at a time in increasing l. Entries outside
/// the shape are not written.
void gemm(const Shape& shape, const Operand& a, const Operand& b, float* c, std::ptrdiff_t ldc,
          bool accumulate);
/// The same in double; float operands are converted (exactly) to double.
void gemm(const Shape& shape, const Operand& a, const Operand& b, double* c, std::ptrdiff_t ldc,
          bool accumulate);

/// Statistics of one column over its non-NaN values (pare::ColumnStats, see stats.h for the
/// method): 8 interleaved lanes of sums, combined in a fixed order.
struct Stats {
  std::int64_t n = 0, missing = 0;
  double mean = 0, variance = 0, min = 0, max = 0;
};
Stats column_stats(const float* x, std::size_t size);
Stats column_stats(const double* x, std::size_t size);

/// Mean and sqrt(sum (x - mean)^2) of n values (no NaN), in double, in 8 interleaved lanes.
struct Moments {
  double mean = 0;
  double norm = 0;
};
Moments moments(const float* x, std::ptrdiff_t n);
/// sum (a_i - mean_a)(b_i - mean_b) in double, in 8 interleaved lanes.
double centered_dot(const float* a, double mean_a, const float* b, double mean_b, std::ptrdiff_t n);

/// sum x_i y_i of n signed bytes, exact.
std::int32_t dot_i8(const std::int8_t* x, const std::int8_t* y, std::ptrdiff_t n);

/// Plane rotations of the column-major matrix `a` (leading dimension ld, `rows` rows): for k = 0,
/// 1, ..., count - 1 in turn, columns x = first + k and y = first + k + 1 become c_k x - s_k y and
/// s_k x + c_k y (a <- a G_k, G_k = [c_k s_k; -s_k c_k] in that plane).
void rotate_columns(double* a, std::ptrdiff_t ld, std::ptrdiff_t rows, std::ptrdiff_t first,
                    const double* c, const double* s, std::ptrdiff_t count);

}  // namespace pare::kernels
