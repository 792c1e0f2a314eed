#include "internal/pair_screen.h"

#include <algorithm>  // std::max, std::clamp, std::fill
#include <atomic>     // std::atomic
#include <cmath>      // std::abs, std::lrint, std::sqrt
#include <cstring>    // std::memcpy

#include "kernels/kernels.h"

#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__))
#include <immintrin.h>
#define PARE_PAIR_CODE_X86 1
#endif

namespace pare::internal {

namespace {

// Rounds a norm up so that its float is never below the exact value.
float up(double norm) { return static_cast<float>(norm * (1 + 1e-6)); }

// Bytes of one group of 16 features.
std::size_t group_bytes(Eigen::Index padded) { return static_cast<std::size_t>(16 * padded); }

std::atomic<bool> vnni_allowed{true};

}  // namespace

PairCodeNorms pair_code_subset(const float* z, Eigen::Index m, Eigen::Index padded, double rest, std::int8_t* q) {
  PairCodeNorms out;
  out.rest = up(rest);
  float top = 0;
  for (Eigen::Index i = 0; i < m; ++i) top = std::max(top, std::abs(z[i]));
  std::fill(q, q + padded, std::int8_t{0});
  if (!(top > 0)) return out;
  const float s = top / 127.0f;
  double coded = 0, error = 0, subset = 0;
  for (Eigen::Index i = 0; i < m; ++i) {
    const auto c = static_cast<std::int32_t>(std::clamp(std::lrint(z[i] / s), -127L, 127L));
    q[i] = static_cast<std::int8_t>(c);
    out.sum += c;
    const double v = static_cast<double>(s) * c, zi = z[i];
    coded += v * v;
    error += (zi - v) * (zi - v);
    subset += zi * zi;
  }
  out.scale = s;
  out.coded = up(std::sqrt(coded));
  out.error = up(std::sqrt(error));
  out.subset = up(std::sqrt(subset));
  return out;
}

void PairCodeBlock::reset(Eigen::Index rows, Eigen::Index count, Eigen::Index rows2) {
  rows_ = rows;
  padded_ = (rows + 3) / 4 * 4;
  rows2_ = rows2;
  padded2_ = (rows2 + 63) / 64 * 64;
  codes_.resize(static_cast<std::size_t>(padded_ * count));
  codes2_.resize(static_cast<std::size_t>(padded2_ * count));
  norms_.assign(static_cast<std::size_t>(count), PairCodeNorms{});
  norms2_.assign(static_cast<std::size_t>(count), PairCodeNorms{});
}

void PairCodeBlock::set(Eigen::Index b, const float* z, double rest, double rest2) {
  auto* row = codes_.data() + b * padded_;
  auto* q = reinterpret_cast<std::int8_t*>(row);
  norms_[static_cast<std::size_t>(b)] = pair_code_subset(z, rows_, padded_, rest, q);
  for (Eigen::Index i = 0; i < padded_; ++i) row[i] = static_cast<std::uint8_t>(q[i] + 128);
  if (rows2_ > 0)
    norms2_[static_cast<std::size_t>(b)] =
        pair_code_subset(z + rows_, rows2_, padded2_, rest2, codes2_.data() + b * padded2_);
}

void PairCodeKept::append(const PairCodeBlock& block, Eigen::Index b) {
  const Eigen::Index k = size_++;
  const Eigen::Index g = k / 16, lane = k % 16;
  // Whole pairs of groups, so the kernel can always read two.
  const Eigen::Index pairs_of_groups = (g + 2) / 2 * 2;
  codes_.reserve(static_cast<std::size_t>(pairs_of_groups) * group_bytes(padded_));
  const auto slots = static_cast<std::size_t>(pairs_of_groups * 16);
  if (scale_.size() < slots) {
    for (auto* v : {&scale_, &coded_, &error_, &rest_}) v->resize(slots, 0.0f);
    offset_.resize(slots, 0);
  }
  auto* to = reinterpret_cast<std::int8_t*>(codes_.data()) + g * 16 * padded_ + lane * 4;
  const std::uint8_t* from = block.row(b);
  for (Eigen::Index t = 0; t < padded_ / 4; ++t)
    for (int i = 0; i < 4; ++i) to[t * 64 + i] = static_cast<std::int8_t>(from[4 * t + i] - 128);
  if (block.padded2() > 0) {
    padded2_ = block.padded2();
    codes2_.insert(codes2_.end(), block.row2(b), block.row2(b) + padded2_);
    norms2_.push_back(block.norms2(b));
  }
  const PairCodeNorms& nb = block.norms(b);
  const auto at = static_cast<std::size_t>(k);
  scale_[at] = nb.scale;
  coded_[at] = nb.coded;
  error_[at] = nb.error;
  rest_[at] = nb.rest;
  offset_[at] = 128 * nb.sum;
}

namespace {

// s_k s_b (q_k . q_b) from the integer product of the kept codes with the candidate's plus 128.
inline float signed_product(const PairCodeKept& kept, Eigen::Index k, std::int32_t product, const PairCodeNorms& nb) {
  return static_cast<float>(product - kept.offset()[k]) * (kept.scale()[k] * nb.scale);
}

// The bound for kept feature k and a candidate, given the integer product of the kept codes with
// the candidate's codes plus 128.
inline float bound_of(const PairCodeKept& kept, Eigen::Index k, std::int32_t product, const PairCodeNorms& nb) {
  const float p = signed_product(kept, k, product, nb);
  const float slack = kept.coded()[k] * nb.error + kept.error()[k] * nb.subset + kept.rest()[k] * nb.rest;
  return std::abs(p) + slack;
}

// The integer product of kept feature k's codes with candidate b's.
std::int32_t product_of(const PairCodeKept& kept, Eigen::Index k, const PairCodeBlock& block, Eigen::Index b) {
  const std::int8_t* codes = kept.group(k / 16) + (k % 16) * 4;
  const std::uint8_t* u = block.row(b);
  std::int32_t product = 0;
  for (Eigen::Index t = 0; t < kept.quads(); ++t)
    for (int i = 0; i < 4; ++i) product += static_cast<std::int32_t>(u[4 * t + i]) * codes[t * 64 + i];
  return product;
}

void find_portable(const PairCodeKept& kept, const PairCodeBlock& block, float cut, Eigen::Index first, int width,
                   Eigen::Index g0, Eigen::Index g1, PairCodeSurvivors& out) {
  for (int c = 0; c < width; ++c)
    for (Eigen::Index k = g0 * 16; k < std::min(kept.size(), g1 * 16); ++k) {
      const PairCodeNorms& nb = block.norms(first + c);
      const std::int32_t product = product_of(kept, k, block, first + c);
      if (!(bound_of(kept, k, product, nb) < cut))
        out[static_cast<std::size_t>(c)].push_back(
            PairCodeHit{static_cast<std::int32_t>(k), signed_product(kept, k, product, nb)});
    }
}

#ifdef PARE_PAIR_CODE_X86

// Sample quad t of a candidate's codes, in every 32-bit lane.
__attribute__((target("avx512f"))) inline __m512i quad_of(const std::uint8_t* row, Eigen::Index t) {
  std::int32_t quad;
  std::memcpy(&quad, row + 4 * t, sizeof quad);
  return _mm512_set1_epi32(quad);
}

// Two groups of 16 kept features against up to 8 candidates per pass: 16 accumulators, each
// sample quad two loads and eight broadcasts for 16 VNNI products of 64 byte pairs.
__attribute__((target("avx512f,avx512bw,avx512dq,avx512vnni"))) void find_vnni(const PairCodeKept& kept,
                                                                       const PairCodeBlock& block, float cut,
                                                                       Eigen::Index first, int width, Eigen::Index g0,
                                                                       Eigen::Index g1, PairCodeSurvivors& out) {
  const Eigen::Index quads = kept.quads();
  const std::uint8_t* rows[kPairCodeTile];
  __m512 scale_b[kPairCodeTile], error_b[kPairCodeTile], subset_b[kPairCodeTile], rest_b[kPairCodeTile];
  for (int c = 0; c < kPairCodeTile; ++c) {
    const Eigen::Index b = first + std::min(c, width - 1);
    rows[c] = block.row(b);
    const PairCodeNorms& nb = block.norms(b);
    scale_b[c] = _mm512_set1_ps(nb.scale);
    error_b[c] = _mm512_set1_ps(nb.error);
    subset_b[c] = _mm512_set1_ps(nb.subset);
    rest_b[c] = _mm512_set1_ps(nb.rest);
  }
  const __m512 cut_v = _mm512_set1_ps(cut);
  const __m512 sign = _mm512_set1_ps(-0.0f);
  // Named accumulators (an array of them makes GCC 12 copy registers around every product).
  const std::uint8_t *r0 = rows[0], *r1 = rows[1], *r2 = rows[2], *r3 = rows[3], *r4 = rows[4], *r5 = rows[5],
                     *r6 = rows[6], *r7 = rows[7];
  for (Eigen::Index g = g0; g < g1; g += 2) {
    __m512i a0 = _mm512_setzero_si512(), a1 = a0, a2 = a0, a3 = a0, a4 = a0, a5 = a0, a6 = a0, a7 = a0;
    __m512i b0 = a0, b1 = a0, b2 = a0, b3 = a0, b4 = a0, b5 = a0, b6 = a0, b7 = a0;
    const auto* k0 = reinterpret_cast<const __m512i*>(kept.group(g));
    const auto* k1 = reinterpret_cast<const __m512i*>(kept.group(g + 1));
    for (Eigen::Index t = 0; t < quads; ++t) {
      const __m512i x = _mm512_loadu_si512(k0 + t), y = _mm512_loadu_si512(k1 + t);
      __m512i u = quad_of(r0, t);
      a0 = _mm512_dpbusd_epi32(a0, u, x);
      b0 = _mm512_dpbusd_epi32(b0, u, y);
      u = quad_of(r1, t);
      a1 = _mm512_dpbusd_epi32(a1, u, x);
      b1 = _mm512_dpbusd_epi32(b1, u, y);
      u = quad_of(r2, t);
      a2 = _mm512_dpbusd_epi32(a2, u, x);
      b2 = _mm512_dpbusd_epi32(b2, u, y);
      u = quad_of(r3, t);
      a3 = _mm512_dpbusd_epi32(a3, u, x);
      b3 = _mm512_dpbusd_epi32(b3, u, y);
      u = quad_of(r4, t);
      a4 = _mm512_dpbusd_epi32(a4, u, x);
      b4 = _mm512_dpbusd_epi32(b4, u, y);
      u = quad_of(r5, t);
      a5 = _mm512_dpbusd_epi32(a5, u, x);
      b5 = _mm512_dpbusd_epi32(b5, u, y);
      u = quad_of(r6, t);
      a6 = _mm512_dpbusd_epi32(a6, u, x);
      b6 = _mm512_dpbusd_epi32(b6, u, y);
      u = quad_of(r7, t);
      a7 = _mm512_dpbusd_epi32(a7, u, x);
      b7 = _mm512_dpbusd_epi32(b7, u, y);
    }
    const __m512i acc[2][kPairCodeTile] = {{a0, a1, a2, a3, a4, a5, a6, a7}, {b0, b1, b2, b3, b4, b5, b6, b7}};
    for (int h = 0; h < 2 && g + h < g1; ++h) {
      const Eigen::Index base = (g + h) * 16;
      const Eigen::Index valid = std::min<Eigen::Index>(16, kept.size() - base);
      if (valid <= 0) break;
      const auto lanes = static_cast<__mmask16>((1u << valid) - 1u);
      const __m512i offset = _mm512_loadu_si512(kept.offset() + base);
      const __m512 scale_k = _mm512_loadu_ps(kept.scale() + base);
      const __m512 coded_k = _mm512_loadu_ps(kept.coded() + base);
      const __m512 error_k = _mm512_loadu_ps(kept.error() + base);
      const __m512 rest_k = _mm512_loadu_ps(kept.rest() + base);
      for (int c = 0; c < width; ++c) {
        const __m512 p = _mm512_mul_ps(_mm512_cvtepi32_ps(_mm512_sub_epi32(acc[h][c], offset)),
                                       _mm512_mul_ps(scale_k, scale_b[c]));
        __m512 slack = _mm512_mul_ps(coded_k, error_b[c]);
        slack = _mm512_add_ps(slack, _mm512_mul_ps(error_k, subset_b[c]));
        slack = _mm512_add_ps(slack, _mm512_mul_ps(rest_k, rest_b[c]));
        const __m512 limit = _mm512_sub_ps(cut_v, slack);
        const __mmask16 below = _mm512_cmp_ps_mask(_mm512_andnot_ps(sign, p), limit, _CMP_LT_OQ);
        auto hit = static_cast<unsigned>(static_cast<__mmask16>(~below & lanes));
        if (hit) {
          alignas(64) float products[16];
          _mm512_store_ps(products, p);
          while (hit) {
            const int lane = __builtin_ctz(hit);
            hit &= hit - 1;
            out[static_cast<std::size_t>(c)].push_back(
                PairCodeHit{static_cast<std::int32_t>(base + lane), products[lane]});
          }
        }
      }
    }
  }
}

// Sample quad t of a candidate's codes as 16-bit values, repeated in every 64-bit lane.
__attribute__((target("avx2"))) inline __m256i quad16_of(const std::uint8_t* row, Eigen::Index t) {
  std::int32_t quad;
  std::memcpy(&quad, row + 4 * t, sizeof quad);
  return _mm256_broadcastq_epi64(_mm_cvtepu8_epi16(_mm_cvtsi32_si128(quad)));
}

// The bounds of 8 kept features (from `base`) with a candidate, given their integer products: the
// operations of bound_of in the same order, lane by lane (no fused multiply-add: the target has
// none), so the survivors are the portable loop's.
__attribute__((target("avx2"))) inline void bounds_avx2(const PairCodeKept& kept, Eigen::Index base, __m256i product,
                                                        const PairCodeNorms& nb, float cut, int c, Eigen::Index valid,
                                                        PairCodeSurvivors& out) {
  const __m256i offset = _mm256_loadu_si256(reinterpret_cast<const __m256i*>(kept.offset() + base));
  const __m256 p = _mm256_mul_ps(_mm256_cvtepi32_ps(_mm256_sub_epi32(product, offset)),
                                 _mm256_mul_ps(_mm256_loadu_ps(kept.scale() + base), _mm256_set1_ps(nb.scale)));
  __m256 slack = _mm256_mul_ps(_mm256_loadu_ps(kept.coded() + base), _mm256_set1_ps(nb.error));
  slack = _mm256_add_ps(slack, _mm256_mul_ps(_mm256_loadu_ps(kept.error() + base), _mm256_set1_ps(nb.subset)));
  slack = _mm256_add_ps(slack, _mm256_mul_ps(_mm256_loadu_ps(kept.rest() + base), _mm256_set1_ps(nb.rest)));
  const __m256 bound = _mm256_add_ps(_mm256_andnot_ps(_mm256_set1_ps(-0.0f), p), slack);
  // Not below the cut (a NaN bound is kept, as `!(bound < cut)` keeps it).
  auto hit = static_cast<unsigned>(_mm256_movemask_ps(_mm256_cmp_ps(bound, _mm256_set1_ps(cut), _CMP_NLT_UQ)));
  hit &= (1u << valid) - 1u;
  if (!hit) return;
  alignas(32) float products[8];
  _mm256_store_ps(products, p);
  while (hit) {
    const int lane = __builtin_ctz(hit);
    hit &= hit - 1;
    out[static_cast<std::size_t>(c)].push_back(PairCodeHit{static_cast<std::int32_t>(base + lane), products[lane]});
  }
}

// One group of 16 kept features against two candidates per pass (AVX2, no VNNI): the codes
// widened to 16 bits and multiplied in pairs into 32-bit lanes (_mm256_madd_epi16: exact, |u k|
// <= 255 x 127), each feature's two lanes added at the end.
__attribute__((target("avx2"))) void find_avx2(const PairCodeKept& kept, const PairCodeBlock& block, float cut,
                                               Eigen::Index first, int width, Eigen::Index g0, Eigen::Index g1,
                                               PairCodeSurvivors& out) {
  const Eigen::Index quads = kept.quads();
  for (int c = 0; c < width; c += 2) {
    const int d = std::min(c + 1, width - 1);  // the second candidate (c again at an odd end)
    const std::uint8_t *row_c = block.row(first + c), *row_d = block.row(first + d);
    const PairCodeNorms &norms_c = block.norms(first + c), &norms_d = block.norms(first + d);
    for (Eigen::Index g = g0; g < g1; ++g) {
      __m256i a0 = _mm256_setzero_si256(), a1 = a0, a2 = a0, a3 = a0, b0 = a0, b1 = a0, b2 = a0, b3 = a0;
      const std::int8_t* codes = kept.group(g);
      for (Eigen::Index t = 0; t < quads; ++t) {
        const std::int8_t* q = codes + t * 64;
        const __m256i k0 = _mm256_cvtepi8_epi16(_mm_loadu_si128(reinterpret_cast<const __m128i*>(q)));
        const __m256i k1 = _mm256_cvtepi8_epi16(_mm_loadu_si128(reinterpret_cast<const __m128i*>(q + 16)));
        const __m256i k2 = _mm256_cvtepi8_epi16(_mm_loadu_si128(reinterpret_cast<const __m128i*>(q + 32)));
        const __m256i k3 = _mm256_cvtepi8_epi16(_mm_loadu_si128(reinterpret_cast<const __m128i*>(q + 48)));
        const __m256i u = quad16_of(row_c, t), v = quad16_of(row_d, t);
        a0 = _mm256_add_epi32(a0, _mm256_madd_epi16(k0, u));
        a1 = _mm256_add_epi32(a1, _mm256_madd_epi16(k1, u));
        a2 = _mm256_add_epi32(a2, _mm256_madd_epi16(k2, u));
        a3 = _mm256_add_epi32(a3, _mm256_madd_epi16(k3, u));
        b0 = _mm256_add_epi32(b0, _mm256_madd_epi16(k0, v));
        b1 = _mm256_add_epi32(b1, _mm256_madd_epi16(k1, v));
        b2 = _mm256_add_epi32(b2, _mm256_madd_epi16(k2, v));
        b3 = _mm256_add_epi32(b3, _mm256_madd_epi16(k3, v));
      }
      // a0 holds features 0-3 as lane pairs, a1 4-7: hadd gives 0 1 4 5 | 2 3 6 7, the permute
      // 0 .. 7.
      const Eigen::Index base = g * 16;
      const Eigen::Index valid = std::min<Eigen::Index>(16, kept.size() - base);
      if (valid <= 0) break;
      constexpr int kOrder = 0xD8;  // 64-bit lanes 0, 2, 1, 3
      const __m256i low_c = _mm256_permute4x64_epi64(_mm256_hadd_epi32(a0, a1), kOrder);
      const __m256i high_c = _mm256_permute4x64_epi64(_mm256_hadd_epi32(a2, a3), kOrder);
      bounds_avx2(kept, base, low_c, norms_c, cut, c, std::min<Eigen::Index>(8, valid), out);
      if (valid > 8) bounds_avx2(kept, base + 8, high_c, norms_c, cut, c, valid - 8, out);
      if (d != c) {
        const __m256i low_d = _mm256_permute4x64_epi64(_mm256_hadd_epi32(b0, b1), kOrder);
        const __m256i high_d = _mm256_permute4x64_epi64(_mm256_hadd_epi32(b2, b3), kOrder);
        bounds_avx2(kept, base, low_d, norms_d, cut, d, std::min<Eigen::Index>(8, valid), out);
        if (valid > 8) bounds_avx2(kept, base + 8, high_d, norms_d, cut, d, valid - 8, out);
      }
    }
  }
}

// The same with SSE2 (every x86-64 processor), for the baseline level: one candidate at a time,
// the codes sign-extended by unpacking (SSE2 has no byte-to-word extension) and multiplied in
// pairs (_mm_madd_epi16), the bounds 4 features at a time in bound_of's order.
inline __m128i pair_sums(__m128i a, __m128i b) {  // lanes (0 + 1, 2 + 3) of a, then of b
  const __m128 fa = _mm_castsi128_ps(a), fb = _mm_castsi128_ps(b);
  return _mm_add_epi32(_mm_castps_si128(_mm_shuffle_ps(fa, fb, _MM_SHUFFLE(2, 0, 2, 0))),
                       _mm_castps_si128(_mm_shuffle_ps(fa, fb, _MM_SHUFFLE(3, 1, 3, 1))));
}

void bounds_sse2(const PairCodeKept& kept, Eigen::Index base, __m128i product, const PairCodeNorms& nb, float cut,
                 int c, Eigen::Index valid, PairCodeSurvivors& out) {
  const __m128i offset = _mm_loadu_si128(reinterpret_cast<const __m128i*>(kept.offset() + base));
  const __m128 p = _mm_mul_ps(_mm_cvtepi32_ps(_mm_sub_epi32(product, offset)),
                              _mm_mul_ps(_mm_loadu_ps(kept.scale() + base), _mm_set1_ps(nb.scale)));
  __m128 slack = _mm_mul_ps(_mm_loadu_ps(kept.coded() + base), _mm_set1_ps(nb.error));
  slack = _mm_add_ps(slack, _mm_mul_ps(_mm_loadu_ps(kept.error() + base), _mm_set1_ps(nb.subset)));
  slack = _mm_add_ps(slack, _mm_mul_ps(_mm_loadu_ps(kept.rest() + base), _mm_set1_ps(nb.rest)));
  const __m128 bound = _mm_add_ps(_mm_andnot_ps(_mm_set1_ps(-0.0f), p), slack);
  auto hit = static_cast<unsigned>(_mm_movemask_ps(_mm_cmpnlt_ps(bound, _mm_set1_ps(cut))));
  hit &= (1u << valid) - 1u;
  if (!hit) return;
  alignas(16) float products[4];
  _mm_store_ps(products, p);
  while (hit) {
    const int lane = __builtin_ctz(hit);
    hit &= hit - 1;
    out[static_cast<std::size_t>(c)].push_back(PairCodeHit{static_cast<std::int32_t>(base + lane), products[lane]});
  }
}

void find_sse2(const PairCodeKept& kept, const PairCodeBlock& block, float cut, Eigen::Index first, int width,
               Eigen::Index g0, Eigen::Index g1, PairCodeSurvivors& out) {
  const Eigen::Index quads = kept.quads();
  for (int c = 0; c < width; ++c) {
    const std::uint8_t* row = block.row(first + c);
    const PairCodeNorms& nb = block.norms(first + c);
    for (Eigen::Index g = g0; g < g1; ++g) {
      const Eigen::Index base = g * 16;
      const Eigen::Index valid = std::min<Eigen::Index>(16, kept.size() - base);
      if (valid <= 0) break;
      __m128i acc[8];
      for (auto& a : acc) a = _mm_setzero_si128();
      const std::int8_t* codes = kept.group(g);
      for (Eigen::Index t = 0; t < quads; ++t) {
        std::int32_t quad;
        std::memcpy(&quad, row + 4 * t, sizeof quad);
        // u0 u1 u2 u3 u0 u1 u2 u3 as 16-bit values.
        const __m128i u = _mm_unpacklo_epi64(_mm_unpacklo_epi8(_mm_cvtsi32_si128(quad), _mm_setzero_si128()),
                                             _mm_unpacklo_epi8(_mm_cvtsi32_si128(quad), _mm_setzero_si128()));
        for (int h = 0; h < 4; ++h) {  // features 4h .. 4h + 3
          const __m128i k = _mm_loadu_si128(reinterpret_cast<const __m128i*>(codes + t * 64 + 16 * h));
          const __m128i lo = _mm_srai_epi16(_mm_unpacklo_epi8(k, k), 8), hi = _mm_srai_epi16(_mm_unpackhi_epi8(k, k), 8);
          acc[2 * h] = _mm_add_epi32(acc[2 * h], _mm_madd_epi16(lo, u));
          acc[2 * h + 1] = _mm_add_epi32(acc[2 * h + 1], _mm_madd_epi16(hi, u));
        }
      }
      for (int h = 0; h < 4 && 4 * h < valid; ++h)
        bounds_sse2(kept, base + 4 * h, pair_sums(acc[2 * h], acc[2 * h + 1]), nb, cut, c,
                    std::min<Eigen::Index>(4, valid - 4 * h), out);
    }
  }
}

bool cpu_has_vnni() {
  static const bool has = __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512bw") &&
                          __builtin_cpu_supports("avx512dq") && __builtin_cpu_supports("avx512vnni");
  return has;
}

#endif

}  // namespace

bool pair_code_uses_vnni() {
#ifdef PARE_PAIR_CODE_X86
  // Only with the AVX-512 kernels running (kernels::force_level can choose a lower level).
  return vnni_allowed.load(std::memory_order_relaxed) && cpu_has_vnni() &&
         kernels::active_level() == kernels::Level::kAvx512;
#else
  return false;
#endif
}

bool pair_code_uses_avx2() {
#ifdef PARE_PAIR_CODE_X86
  return vnni_allowed.load(std::memory_order_relaxed) && !pair_code_uses_vnni() &&
         kernels::active_level() != kernels::Level::kBaseline;
#else
  return false;
#endif
}

void pair_code_allow_vnni(bool allow) { vnni_allowed.store(allow); }

float pair_code_second_bound(const PairCodeKept& kept, const PairCodeBlock& block, Eigen::Index b,
                             const PairCodeHit& hit) {
  const Eigen::Index k = hit.k;
  const std::int8_t* x = kept.row2(k);
  const std::int8_t* y = block.row2(b);
  const std::int32_t product = kernels::dot_i8(x, y, block.padded2());
  const PairCodeNorms &n1 = block.norms(b), &n2k = kept.norms2(k), &n2b = block.norms2(b);
  const float p = hit.product + static_cast<float>(product) * (n2k.scale * n2b.scale);
  const float slack = kept.coded()[k] * n1.error + kept.error()[k] * n1.subset + n2k.coded * n2b.error +
                      n2k.error * n2b.subset + n2k.rest * n2b.rest;
  return std::abs(p) + slack;
}

float pair_code_bound(const PairCodeKept& kept, Eigen::Index k, const PairCodeBlock& block, Eigen::Index b) {
  return bound_of(kept, k, product_of(kept, k, block, b), block.norms(b));
}

void pair_code_find(const PairCodeKept& kept, const PairCodeBlock& block, float cut, Eigen::Index first, int width,
                    Eigen::Index g0, Eigen::Index g1, PairCodeSurvivors& out) {
  if (width <= 0 || g1 <= g0) return;
#ifdef PARE_PAIR_CODE_X86
  if (pair_code_uses_vnni()) {
    find_vnni(kept, block, cut, first, width, g0, g1, out);
    return;
  }
  if (pair_code_uses_avx2()) {
    find_avx2(kept, block, cut, first, width, g0, g1, out);
    return;
  }
  if (vnni_allowed.load(std::memory_order_relaxed)) {
    find_sse2(kept, block, cut, first, width, g0, g1, out);
    return;
  }
#endif
  find_portable(kept, block, cut, first, width, g0, g1, out);
}

}  // namespace pare::internal
