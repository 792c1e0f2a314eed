// The kernels' bodies, compiled once per level: a level file defines PARE_KERNEL_LEVEL (the
// namespace of its copy) and PARE_KERNEL_TABLE (the name of its table), then includes this file;
// its -march decides the vector width. Everything here but the table has internal linkage, and
// nothing from a header is instantiated (no std::min, no containers), so no symbol compiled for
// one level can stand in for another's at link time (kernels.h). The arithmetic must not depend
// on the width: see kernels.h, and keep it so when editing.
#if !defined(PARE_KERNEL_LEVEL) || !defined(PARE_KERNEL_TABLE)
#  error "define PARE_KERNEL_LEVEL and PARE_KERNEL_TABLE before including kernels/body.h"
#endif

#include <cstddef>  // std::ptrdiff_t, std::size_t
#include <cstdint>  // std::int8_t, std::int32_t, std::int64_t
#include <cstdlib>  // std::aligned_alloc, std::free
#include <cstring>  // std::memcpy, std::memset
#include <new>      // std::bad_alloc

#include "kernels/table.h"

namespace pare::kernels {
namespace PARE_KERNEL_LEVEL {
namespace {

using Index = std::ptrdiff_t;

// Bytes of one vector register, and the columns of C one register tile spans (its rows are two
// registers' worth): 2 x 8 accumulators of the 32 AVX-512 registers, 2 x 6 of the 16 others.
#if defined(__AVX512F__)
constexpr int kBytes = 64;
constexpr int kTileCols = 8;
#elif defined(__AVX2__)
constexpr int kBytes = 32;
constexpr int kTileCols = 6;
#else
constexpr int kBytes = 16;
constexpr int kTileCols = 6;
#endif

template <typename T>
constexpr T lesser(T a, T b) {
  return b < a ? b : a;
}

template <typename T>
struct Simd {
  static constexpr int kWidth = kBytes / static_cast<int>(sizeof(T));
  typedef T Vector __attribute__((vector_size(kBytes)));
};

// Rows of one register tile, and the blocking: kc terms of the sum per pass over C, mc rows of A
// and nc columns of B packed at a time (a block of A of mc x kc values stays in the level-2
// cache, a panel of B of kc x kTileCols in the level-1 cache).
template <typename T>
constexpr Index kTileRows = 2 * Simd<T>::kWidth;
template <typename T>
constexpr Index kBlockK = 256;
template <typename T>
constexpr Index kBlockM = (sizeof(T) == 4 ? 192 : 96) / kTileRows<T>* kTileRows<T>;
template <typename T>
constexpr Index kBlockN = 480 / kTileCols* kTileCols;

// 64-byte aligned scratch memory.
class Buffer {
 public:
  explicit Buffer(std::size_t bytes) {
    bytes = (bytes + 63) / 64 * 64;
    data_ = std::aligned_alloc(64, bytes == 0 ? 64 : bytes);
    if (data_ == nullptr) throw std::bad_alloc();
  }
  ~Buffer() { std::free(data_); }
  Buffer(const Buffer&) = delete;
  Buffer& operator=(const Buffer&) = delete;
  template <typename T>
  T* as() const {
    return static_cast<T*>(data_);
  }

 private:
  void* data_;
};

// Element (i, j) of an operand whose values are S.
template <typename S>
inline S element(const S* d, Index rs, Index cs, bool symmetric, Index i, Index j) {
  if (symmetric && j > i) return d[j * rs + i * cs];
  return d[i * rs + j * cs];
}

// Rows i0 .. i0 + rows - 1 and terms l0 .. l0 + kc - 1 of A, as panels of kTileRows rows, each
// kc x kTileRows values term by term (k-major); rows past the end are zero.
template <typename T, typename S>
void pack_a(const S* d, Index rs, Index cs, bool symmetric, Index i0, Index rows, Index l0,
            Index kc, T* out) {
  constexpr Index mr = kTileRows<T>;
  for (Index p = 0; p < rows; p += mr) {
    const Index h = lesser(mr, rows - p);
    T* panel = out + (p / mr) * kc * mr;
    if (h < mr)
      std::memset(static_cast<void*>(panel), 0, static_cast<std::size_t>(kc * mr) * sizeof(T));
    if (!symmetric && rs == 1 && h == mr) {
      // A fixed count, so the copy is a few vector moves (a variable one becomes `rep movs`,
      // whose start-up cost exceeds a copy this short many times over).
      for (Index l = 0; l < kc; ++l) {
        const S* from = d + (i0 + p) + (l0 + l) * cs;
        T* to = panel + l * mr;
        for (Index r = 0; r < mr; ++r) to[r] = static_cast<T>(from[r]);
      }
    } else if (!symmetric && rs == 1) {
      for (Index l = 0; l < kc; ++l) {
        const S* from = d + (i0 + p) + (l0 + l) * cs;
        T* to = panel + l * mr;
        for (Index r = 0; r < h; ++r) to[r] = static_cast<T>(from[r]);
      }
    } else if (!symmetric) {
      // Strided reads (one stream per row), contiguous writes.
      for (Index l = 0; l < kc; ++l) {
        const S* from = d + (i0 + p) * rs + (l0 + l) * cs;
        T* to = panel + l * mr;
        for (Index r = 0; r < h; ++r) to[r] = static_cast<T>(from[r * rs]);
      }
    } else {
      // The lower triangle of a symmetric matrix: column l of the panel's rows is stored in
      // column l where l <= i, in row l where l > i.
      for (Index l = 0; l < kc; ++l) {
        const Index j = l0 + l;
        T* to = panel + l * mr;
        for (Index r = 0; r < h; ++r) {
          const Index i = i0 + p + r;
          to[r] = static_cast<T>(j <= i ? d[i * rs + j * cs] : d[j * rs + i * cs]);
        }
      }
    }
  }
}

// Terms l0 .. l0 + kc - 1 and columns j0 .. j0 + cols - 1 of B, as panels of kTileCols columns,
// each kc x kTileCols values term by term; columns past the end are zero.
template <typename T, typename S>
void pack_b(const S* d, Index rs, Index cs, bool symmetric, Index l0, Index kc, Index j0,
            Index cols, T* out) {
  constexpr Index nr = kTileCols;
  for (Index q = 0; q < cols; q += nr) {
    const Index w = lesser(nr, cols - q);
    T* panel = out + (q / nr) * kc * nr;
    if (w < nr)
      std::memset(static_cast<void*>(panel), 0, static_cast<std::size_t>(kc * nr) * sizeof(T));
    if (!symmetric && rs == 1) {
      // Strided reads (one stream per column), contiguous writes.
      for (Index l = 0; l < kc; ++l) {
        const S* from = d + l0 + l + (j0 + q) * cs;
        T* to = panel + l * nr;
        for (Index c = 0; c < w; ++c) to[c] = static_cast<T>(from[c * cs]);
      }
    } else if (!symmetric && cs == 1 && w == nr) {
      for (Index l = 0; l < kc; ++l) {
        const S* from = d + (l0 + l) * rs + j0 + q;
        T* to = panel + l * nr;
        for (Index c = 0; c < nr; ++c) to[c] = static_cast<T>(from[c]);
      }
    } else if (!symmetric && cs == 1) {
      for (Index l = 0; l < kc; ++l) {
        const S* from = d + (l0 + l) * rs + j0 + q;
        T* to = panel + l * nr;
        for (Index c = 0; c < w; ++c) to[c] = static_cast<T>(from[c]);
      }
    } else {
      for (Index l = 0; l < kc; ++l)
        for (Index c = 0; c < w; ++c)
          panel[l * nr + c] = static_cast<T>(element(d, rs, cs, symmetric, l0 + l, j0 + q + c));
    }
  }
}

template <typename T>
void pack_a_operand(const Operand& a, Index i0, Index rows, Index l0, Index kc, T* out) {
  if (a.single)
    pack_a(static_cast<const float*>(a.data), a.row_stride, a.col_stride, a.lower_symmetric, i0,
           rows, l0, kc, out);
  else
    pack_a(static_cast<const double*>(a.data), a.row_stride, a.col_stride, a.lower_symmetric, i0,
           rows, l0, kc, out);
}

template <typename T>
void pack_b_operand(const Operand& b, Index l0, Index kc, Index j0, Index cols, T* out) {
  if (b.single)
    pack_b(static_cast<const float*>(b.data), b.row_stride, b.col_stride, b.lower_symmetric, l0, kc,
           j0, cols, out);
  else
    pack_b(static_cast<const double*>(b.data), b.row_stride, b.col_stride, b.lower_symmetric, l0,
           kc, j0, cols, out);
}

// One register tile: C (kTileRows x kTileCols, leading dimension ldc) = C (when `load`, else 0)
// plus kc terms, added one at a time: acc += a * b, a product rounded and then a sum rounded (no
// contraction: the file is compiled with -ffp-contract=off). A is a packed panel; B is a packed
// panel (kPacked: b(l, j) = b[l * kTileCols + j]) or read in place from a column-major operand
// (b(l, j) = b[l + j * ldb]).
template <typename T, bool kPacked>
inline void tile(Index kc, const T* __restrict ap, const T* __restrict b, Index ldb,
                 T* __restrict c, Index ldc, bool load) {
  using V = typename Simd<T>::Vector;
  constexpr int w = Simd<T>::kWidth;
  V lo[kTileCols], hi[kTileCols];
#pragma GCC unroll 8
  for (int j = 0; j < kTileCols; ++j) {
    if (load) {
      std::memcpy(&lo[j], c + j * ldc, sizeof(V));
      std::memcpy(&hi[j], c + j * ldc + w, sizeof(V));
    } else {
      lo[j] = V{};
      hi[j] = V{};
    }
  }
  for (Index l = 0; l < kc; ++l) {
    V a0, a1;
    std::memcpy(&a0, ap, sizeof(V));
    std::memcpy(&a1, ap + w, sizeof(V));
#pragma GCC unroll 8
    for (int j = 0; j < kTileCols; ++j) {
      const T bj = kPacked ? b[j] : b[j * ldb];
      lo[j] += a0 * bj;
      hi[j] += a1 * bj;
    }
    ap += 2 * w;
    b += kPacked ? kTileCols : 1;
  }
#pragma GCC unroll 8
  for (int j = 0; j < kTileCols; ++j) {
    std::memcpy(c + j * ldc, &lo[j], sizeof(V));
    std::memcpy(c + j * ldc + w, &hi[j], sizeof(V));
  }
}

// The product in its internal form: C (m x n, element (i, j) at c[i * crs + j * ccs]).
template <typename T>
struct Product {
  Index m, n, k;
  bool lower;
  Index diagonal;
  Operand a, b;
  T* c;
  Index crs, ccs;
  bool accumulate;
};

template <typename T>
void gemm_blocked(const Product<T>& pr) {
  constexpr Index mr = kTileRows<T>, nr = kTileCols;
  constexpr Index kcb = kBlockK<T>, mcb = kBlockM<T>, ncb = kBlockN<T>;
  const Index m = pr.m, n = pr.n, k = pr.k;
  T* const c = pr.c;
  const Index crs = pr.crs, ccs = pr.ccs;
  // Whether entry (i, j) is computed; a tile or block is skipped when none of its entries is.
  auto wanted = [&](Index i, Index j) { return !pr.lower || j <= i + pr.diagonal; };
  if (m <= 0 || n <= 0) return;
  if (k <= 0) {
    if (!pr.accumulate)
      for (Index j = 0; j < n; ++j)
        for (Index i = 0; i < m; ++i)
          if (wanted(i, j)) c[i * crs + j * ccs] = 0;
    return;
  }
  // B is read in place when it is column-major and of the working type (its columns then stream
  // through the tile); otherwise, and for a last panel of fewer than kTileCols columns, packed.
  const bool in_place =
      pr.b.row_stride == 1 && !pr.b.lower_symmetric && pr.b.single == (sizeof(T) == 4);
  const T* const b_values = static_cast<const T*>(pr.b.data);
  // Only as much scratch as the shape needs (small products are common).
  const Index kc_most = lesser(kcb, k);
  const Index mc_most = lesser(mcb, (m + mr - 1) / mr * mr),
              nc_most = lesser(ncb, (n + nr - 1) / nr * nr);
  const Buffer a_buffer(static_cast<std::size_t>(mc_most * kc_most) * sizeof(T));
  const Buffer b_buffer(static_cast<std::size_t>(kc_most * nc_most) * sizeof(T));
  T* const ap = a_buffer.as<T>();
  T* const bp = b_buffer.as<T>();
  alignas(64) T edge[mr * nr];
  for (Index pc = 0; pc < k; pc += kcb) {
    const Index kc = lesser(kcb, k - pc);
    const bool load = pr.accumulate || pc > 0;
    for (Index jc = 0; jc < n; jc += ncb) {
      const Index nc = lesser(ncb, n - jc);
      if (!wanted(m - 1, jc))
        break;  // this block of columns and every later one is above the triangle
      const Index full_panels = in_place ? nc / nr : 0;
      pack_b_operand(pr.b, pc, kc, jc + full_panels * nr, nc - full_panels * nr,
                     bp + full_panels * kc * nr);
      for (Index ic = 0; ic < m; ic += mcb) {
        const Index mc = lesser(mcb, m - ic);
        if (!wanted(ic + mc - 1, jc)) continue;
        pack_a_operand(pr.a, ic, mc, pc, kc, ap);
        for (Index jr = 0; jr < nc; jr += nr) {
          const Index cols = lesser(nr, nc - jr), j0 = jc + jr;
          const bool direct = jr / nr < full_panels;
          const T* bpanel =
              direct ? b_values + pc + j0 * pr.b.col_stride : bp + (jr / nr) * kc * nr;
          for (Index ir = 0; ir < mc; ir += mr) {
            const Index rows = lesser(mr, mc - ir), i0 = ic + ir;
            if (!wanted(i0 + rows - 1, j0)) continue;
            const T* apanel = ap + (ir / mr) * kc * mr;
            T* ct = c + i0 * crs + j0 * ccs;
            if (crs == 1 && rows == mr && cols == nr && wanted(i0, j0 + nr - 1)) {
              if (direct)
                tile<T, false>(kc, apanel, bpanel, pr.b.col_stride, ct, ccs, load);
              else
                tile<T, true>(kc, apanel, bpanel, 0, ct, ccs, load);
              continue;
            }
            // A tile at an edge, across the diagonal or of a transposed C: computed whole in
            // `edge`, written only where wanted (which entries are computed never depends on
            // the tile's size).
            if (load)
              for (Index j = 0; j < nr; ++j)
                for (Index i = 0; i < mr; ++i)
                  edge[i + j * mr] =
                      i < rows && j < cols && wanted(i0 + i, j0 + j) ? ct[i * crs + j * ccs] : T(0);
            if (direct)
              tile<T, false>(kc, apanel, bpanel, pr.b.col_stride, edge, mr, load);
            else
              tile<T, true>(kc, apanel, bpanel, 0, edge, mr, load);
            for (Index j = 0; j < cols; ++j)
              for (Index i = 0; i < rows; ++i)
                if (wanted(i0 + i, j0 + j)) ct[i * crs + j * ccs] = edge[i + j * mr];
          }
        }
      }
    }
  }
}

// C = A B as given, or as C^T = B^T A^T when A is a transposed column-major operand and B a
// column-major one of the working type: the transposed form then packs B^T (k x n values)
// instead of A (m x k), scattered either way, and reads A^T in place. Every entry is the same
// sum in the same order in both forms (x y = y x exactly).
template <typename T>
void gemm_impl(const Shape& s, const Operand& a, const Operand& b, T* c, Index ldc,
               bool accumulate) {
  const bool plain = !s.lower && !a.lower_symmetric && !b.lower_symmetric;
  const bool a_transposed = a.row_stride != 1 && a.col_stride == 1;
  const bool a_working = a.single == (sizeof(T) == 4);
  if (plain && a_transposed && a_working && b.row_stride == 1 && s.n < s.m) {
    // C^T is computed into a column-major buffer: written in place, row by row of C, its tiles
    // would walk memory with the stride of C's columns.
    const Index m = s.m, n = s.n;
    const Buffer buffer(static_cast<std::size_t>(m * n) * sizeof(T));
    T* const ct = buffer.as<T>();
    if (accumulate)
      for (Index i = 0; i < m; ++i)
        for (Index j = 0; j < n; ++j) ct[j + i * n] = c[i + j * ldc];
    gemm_blocked(
        Product<T>{n, m, s.k, false, 0, transposed(b), transposed(a), ct, 1, n, accumulate});
    for (Index j = 0; j < n; ++j)
      for (Index i = 0; i < m; ++i) c[i + j * ldc] = ct[j + i * n];
    return;
  }
  gemm_blocked(Product<T>{s.m, s.n, s.k, s.lower, s.diagonal, a, b, c, 1, ldc, accumulate});
}

void gemm_f32(const Shape& s, const Operand& a, const Operand& b, float* c, Index ldc,
              bool accumulate) {
  gemm_impl<float>(s, a, b, c, ldc, accumulate);
}

void gemm_f64(const Shape& s, const Operand& a, const Operand& b, double* c, Index ldc,
              bool accumulate) {
  gemm_impl<double>(s, a, b, c, ldc, accumulate);
}

// Sums in kLanes interleaved partial sums (value i goes to lane i % kLanes), combined in a fixed
// order at the end: the compiler keeps them in vector registers of any width (one running sum
// would serialise every addition), and the result depends on nothing but the values.
constexpr int kLanes = 8;

inline double combine(const double (&lane)[kLanes]) {
  return ((lane[0] + lane[1]) + (lane[2] + lane[3])) + ((lane[4] + lane[5]) + (lane[6] + lane[7]));
}

// Column statistics (pare::column_stats): count, sum, min and max in one pass, then the squared
// deviations from the mean and their sum (the correction of the corrected two-pass algorithm).
template <typename T>
Stats stats_impl(const T* data, std::size_t size) {
  Stats s;
  const double nan = __builtin_nan(""), inf = __builtin_inf();
  double sums[kLanes] = {}, lows[kLanes], highs[kLanes];
  std::int64_t counts[kLanes] = {};
  for (int l = 0; l < kLanes; ++l) {
    lows[l] = inf;
    highs[l] = -inf;
  }
  // Selects, not branches, so the lanes vectorise.
  auto add = [&](int l, T value) {
    const bool seen = !__builtin_isnan(value);
    const double x = seen ? static_cast<double>(value) : 0.0;
    sums[l] += x;
    counts[l] += seen ? 1 : 0;
    const double low = seen ? x : inf, high = seen ? x : -inf;
    lows[l] = low < lows[l] ? low : lows[l];
    highs[l] = high > highs[l] ? high : highs[l];
  };
  std::size_t i = 0;
  for (; i + kLanes <= size; i += kLanes)
    for (int l = 0; l < kLanes; ++l) add(l, data[i + static_cast<std::size_t>(l)]);
  for (int l = 0; i < size; ++i, ++l) add(l, data[i]);
  double lo = inf, hi = -inf;
  std::int64_t n = 0;
  for (int l = 0; l < kLanes; ++l) {
    lo = lows[l] < lo ? lows[l] : lo;
    hi = hi < highs[l] ? highs[l] : hi;
    n += counts[l];
  }
  s.n = n;
  s.missing = static_cast<std::int64_t>(size) - n;
  if (n == 0) {
    s.mean = s.variance = s.min = s.max = nan;
    return s;
  }
  const double mean = combine(sums) / static_cast<double>(n);
  double square_lanes[kLanes] = {}, deviation_lanes[kLanes] = {};
  auto deviate = [&](int l, T value) {
    const bool seen = !__builtin_isnan(value);
    const double d = seen ? static_cast<double>(value) - mean : 0.0;
    square_lanes[l] += d * d;
    deviation_lanes[l] += d;
  };
  i = 0;
  for (; i + kLanes <= size; i += kLanes)
    for (int l = 0; l < kLanes; ++l) deviate(l, data[i + static_cast<std::size_t>(l)]);
  for (int l = 0; i < size; ++i, ++l) deviate(l, data[i]);
  const double squares = combine(square_lanes), deviations = combine(deviation_lanes);
  s.mean = mean;
  s.min = lo;
  s.max = hi;
  if (n < 2) {
    s.variance = nan;
  } else {
    const double dn = static_cast<double>(n);
    // Clamp rounding below zero, but keep NaN (an infinite value makes the variance undefined).
    const double v = (squares - deviations * deviations / dn) / (dn - 1);
    s.variance = v < 0 ? 0.0 : v;
  }
  return s;
}

Stats column_stats_f32(const float* x, std::size_t size) {
  return stats_impl(x, size);
}
Stats column_stats_f64(const double* x, std::size_t size) {
  return stats_impl(x, size);
}

Moments moments_impl(const float* x, Index n) {
  double sums[kLanes] = {};
  Index i = 0;
  for (; i + kLanes <= n; i += kLanes)
    for (int l = 0; l < kLanes; ++l) sums[l] += static_cast<double>(x[i + l]);
  for (int l = 0; i < n; ++i, ++l) sums[l] += static_cast<double>(x[i]);
  Moments m;
  m.mean = combine(sums) / static_cast<double>(n);
  double squares[kLanes] = {};
  for (i = 0; i + kLanes <= n; i += kLanes)
    for (int l = 0; l < kLanes; ++l) {
      const double d = static_cast<double>(x[i + l]) - m.mean;
      squares[l] += d * d;
    }
  for (int l = 0; i < n; ++i, ++l) {
    const double d = static_cast<double>(x[i]) - m.mean;
    squares[l] += d * d;
  }
  m.norm = __builtin_sqrt(combine(squares));
  return m;
}

double centered_dot_impl(const float* a, double mean_a, const float* b, double mean_b, Index n) {
  double sums[kLanes] = {};
  Index i = 0;
  for (; i + kLanes <= n; i += kLanes)
    for (int l = 0; l < kLanes; ++l)
      sums[l] +=
          (static_cast<double>(a[i + l]) - mean_a) * (static_cast<double>(b[i + l]) - mean_b);
  for (int l = 0; i < n; ++i, ++l)
    sums[l] += (static_cast<double>(a[i]) - mean_a) * (static_cast<double>(b[i]) - mean_b);
  return combine(sums);
}

// Plane rotations of column pairs: for each k < count, columns first + k and first + k + 1
// (x, y) become (c x - s y, s x + c y), in that order. Element by element, so the width of the
// vectors changes nothing; rows are taken in chunks that stay in cache through the sequence.
void rotate_columns_impl(double* a, Index ld, Index rows, Index first, const double* c,
                         const double* s, Index count) {
  constexpr Index kChunk = 64;
  for (Index r0 = 0; r0 < rows; r0 += kChunk) {
    const Index h = lesser(kChunk, rows - r0);
    for (Index k = 0; k < count; ++k) {
      double* __restrict x = a + (first + k) * ld + r0;
      double* __restrict y = x + ld;
      const double ck = c[k], sk = s[k];
      for (Index i = 0; i < h; ++i) {
        const double xi = x[i], yi = y[i];
        x[i] = ck * xi - sk * yi;
        y[i] = sk * xi + ck * yi;
      }
    }
  }
}

// Integer products: exact, so any order gives the same sum.
std::int32_t dot_i8_impl(const std::int8_t* x, const std::int8_t* y, Index n) {
  std::int32_t sum = 0;
  for (Index i = 0; i < n; ++i)
    sum += static_cast<std::int32_t>(x[i]) * static_cast<std::int32_t>(y[i]);
  return sum;
}

}  // namespace
}  // namespace PARE_KERNEL_LEVEL

extern const Table PARE_KERNEL_TABLE;
const Table PARE_KERNEL_TABLE = {
    &PARE_KERNEL_LEVEL::gemm_f32,         &PARE_KERNEL_LEVEL::gemm_f64,
    &PARE_KERNEL_LEVEL::column_stats_f32, &PARE_KERNEL_LEVEL::column_stats_f64,
    &PARE_KERNEL_LEVEL::moments_impl,     &PARE_KERNEL_LEVEL::centered_dot_impl,
    &PARE_KERNEL_LEVEL::dot_i8_impl,      &PARE_KERNEL_LEVEL::rotate_columns_impl,
};

}  // namespace pare::kernels
