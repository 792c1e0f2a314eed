// The first look of correlation pruning: a bound on |r| for every (kept, candidate) pair from an
// 8-bit product over a subset of the samples, so that only the pairs the bound cannot rule out
// get a full product.
//
// For standardised columns a and b (unit norm), split the samples into the subset S and the rest
// R. Cauchy-Schwarz on R gives
//   |r| = |a_S . b_S + a_R . b_R| <= |a_S . b_S| + |a_R| |b_R|.
// a_S is stored as s_a q_a + e_a with q_a in [-127, 127] (s_a = max |a_S| / 127) and e_a the
// rounding left over, so
//   a_S . b_S = s_a s_b (q_a . q_b) + (s_a q_a) . e_b + e_a . b_S,
// and the last two terms are at most |s_a q_a| |e_b| + |e_a| |b_S| (Cauchy-Schwarz again). The
// integer product q_a . q_b is exact, so
//   |r| <= s_a s_b |q_a . q_b| + |s_a q_a| |e_b| + |e_a| |b_S| + |a_R| |b_R|
// holds without any assumption on the data; the norms are computed in double and rounded up. On
// processors with AVX-512 VNNI the integer products run 64 per instruction, four times the float
// rate; with AVX2, 16 per instruction (16-bit products summed in pairs), with SSE2 8; elsewhere a
// portable loop computes the same integers, so the pairs found never depend on the processor.
//
// Names: PairCode* and pair_code_* are this 8-bit coding of feature pairs (the codes, the bound
// and the pairs it cannot rule out); they have nothing to do with the sample outlier screen
// (pare/outliers.h, SampleScreen).
#pragma once

#include <Eigen/Core>

#include <array>    // std::array
#include <cstdint>  // std::int32_t, std::uint8_t
#include <vector>   // std::vector

#include "internal/growable_buffer.h"

namespace pare::internal {

/// The quantities of one feature the bound needs.
struct PairCodeNorms {
  float scale = 0;   ///< s = max |z_S| / 127
  float coded = 0;   ///< |s q|, rounded up
  float error = 0;   ///< |z_S - s q|, rounded up
  float subset = 0;  ///< |z_S|, rounded up
  float rest = 0;    ///< |z_R|, rounded up
  std::int32_t sum = 0;  ///< sum of q
};

/// Codes `z` (the m subset values of a standardised column) into `q` (m values in [-127, 127],
/// then zeros up to `padded`); `rest` is |z_R|, passed through. Returns the norms.
PairCodeNorms pair_code_subset(const float* z, Eigen::Index m, Eigen::Index padded, double rest, std::int8_t* q);

/// The candidates of one block: each one's codes plus 128 (so unsigned), a row of `padded` bytes.
/// With a second look, also the codes of the next `rows2` samples S2 (signed, a row of `padded2`
/// bytes), for the pairs the first look cannot rule out: the same bound over S and S2 with
/// Cauchy-Schwarz on the rest R2 only.
class PairCodeBlock {
 public:
  void reset(Eigen::Index rows, Eigen::Index count, Eigen::Index rows2 = 0);
  /// Codes candidate `b` (thread-safe for distinct b) from its standardised column `z` (at least
  /// rows + rows2 values): `rest` is |z| over every row past S, `rest2` over every row past S2.
  void set(Eigen::Index b, const float* z, double rest, double rest2 = 0);
  Eigen::Index padded() const { return padded_; }
  Eigen::Index padded2() const { return padded2_; }
  const std::uint8_t* row(Eigen::Index b) const { return codes_.data() + b * padded_; }
  const std::int8_t* row2(Eigen::Index b) const { return codes2_.data() + b * padded2_; }
  const PairCodeNorms& norms(Eigen::Index b) const { return norms_[static_cast<std::size_t>(b)]; }
  const PairCodeNorms& norms2(Eigen::Index b) const { return norms2_[static_cast<std::size_t>(b)]; }

 private:
  Eigen::Index rows_ = 0, padded_ = 0, rows2_ = 0, padded2_ = 0;
  std::vector<std::uint8_t> codes_;
  std::vector<std::int8_t> codes2_;
  std::vector<PairCodeNorms> norms_, norms2_;
};

/// The kept features, interleaved in groups of 16 for the product: for group g and sample quad t,
/// 64 bytes hold the 4 codes of samples 4t..4t+3 of each of the group's 16 features.
class PairCodeKept {
 public:
  explicit PairCodeKept(Eigen::Index padded) : padded_(padded) {}
  /// Appends candidate `b` of `block` (with its second-look codes when `block` has them).
  void append(const PairCodeBlock& block, Eigen::Index b);
  Eigen::Index size() const { return size_; }
  Eigen::Index groups() const { return (size_ + 15) / 16; }
  Eigen::Index quads() const { return padded_ / 4; }
  const std::int8_t* group(Eigen::Index g) const {
    return reinterpret_cast<const std::int8_t*>(codes_.data()) + g * 16 * padded_;
  }
  // Per feature, padded to whole groups (zeros past size()).
  const float* scale() const { return scale_.data(); }
  const float* coded() const { return coded_.data(); }
  const float* error() const { return error_.data(); }
  const float* rest() const { return rest_.data(); }
  const std::int32_t* offset() const { return offset_.data(); }  ///< 128 sum q
  const std::int8_t* row2(Eigen::Index k) const { return codes2_.data() + k * padded2_; }
  const PairCodeNorms& norms2(Eigen::Index k) const { return norms2_[static_cast<std::size_t>(k)]; }

 private:
  Eigen::Index padded_, size_ = 0, padded2_ = 0;
  GrowableBuffer codes_;  // whole groups; new memory is zero
  std::vector<float> scale_, coded_, error_, rest_;
  std::vector<std::int32_t> offset_;
  std::vector<std::int8_t> codes2_;
  std::vector<PairCodeNorms> norms2_;
};

/// At most this many candidates per call of pair_code_find.
inline constexpr int kPairCodeTile = 8;
/// A pair the first look cannot rule out: the kept position and s_k s_b (q_k . q_b).
struct PairCodeHit {
  std::int32_t k;
  float product;
};
/// For each candidate of a tile, the pairs whose bound is not below `cut`.
using PairCodeSurvivors = std::array<std::vector<PairCodeHit>, kPairCodeTile>;

/// Appends to `out[c]`, in increasing order, every kept feature k in groups [g0, g1) whose bound
/// with candidate `first + c` (c < width <= kPairCodeTile) is not below `cut`.
void pair_code_find(const PairCodeKept& kept, const PairCodeBlock& block, float cut, Eigen::Index first, int width,
                    Eigen::Index g0, Eigen::Index g1, PairCodeSurvivors& out);

/// The bound for kept feature k and candidate b (what pair_code_find compares with `cut`, up to the
/// rounding of its last float operations).
float pair_code_bound(const PairCodeKept& kept, Eigen::Index k, const PairCodeBlock& block, Eigen::Index b);

/// The bound for a pair the first look kept (`hit`), over S and S2 with Cauchy-Schwarz on the rest
/// past S2: |product + s2_k s2_b (q2_k . q2_b)| plus the coding allowances of S and S2 plus
/// |z_k,R2| |z_b,R2|.
float pair_code_second_bound(const PairCodeKept& kept, const PairCodeBlock& block, Eigen::Index b,
                             const PairCodeHit& hit);

/// Whether pair_code_find uses the VNNI kernel: on a processor with AVX-512 VNNI while the AVX-512
/// kernels run (kernels::active_level). Otherwise it uses an AVX2 kernel while the AVX2 or AVX-512
/// kernels run (pair_code_uses_avx2), else SSE2 on x86-64 and a portable loop elsewhere; all find
/// the same pairs. `allow = false` forces the portable loop (for tests).
bool pair_code_uses_vnni();
bool pair_code_uses_avx2();
void pair_code_allow_vnni(bool allow);

}  // namespace pare::internal
