// Sorting float values with their row numbers by an LSD radix sort on order-preserving keys: the
// per-feature sort of the scores against classes (src/ranking.cpp) and against a continuous target
// (src/target_scores.cpp). Private to the library.
#pragma once

#include <algorithm>  // std::sort, std::upper_bound, std::copy, std::fill, std::min, std::max
#include <bit>        // std::bit_cast
#include <cstddef>    // std::size_t
#include <cstdint>    // std::uint32_t, std::uint64_t, std::int64_t
#include <vector>     // std::vector

namespace pare::internal {

// Maps a float to an unsigned key with the same order (negative values flipped), so a sort of
// (key << 32 | row) sorts by value with ties in row order. -0 is folded into +0 first: the two
// compare equal and must sort as one value.
inline std::uint32_t order_key(float v) {
  const auto u = std::bit_cast<std::uint32_t>(v + 0.0f);
  return (u & 0x80000000u) ? ~u : (u | 0x80000000u);
}

// Sorts keys (value key in the high 32 bits, row in the low 32) by their high 32 bits: an LSD radix
// sort, 8 bits a pass, stable, so rows of tied values stay in the order they were pushed. Passes in
// which every key has the same byte are skipped.
inline void sort_keys(std::vector<std::uint64_t>& keys, std::vector<std::uint64_t>& buffer) {
  if (keys.empty()) return;
  buffer.resize(keys.size());
  for (int shift = 32; shift < 64; shift += 8) {
    std::size_t counts[257] = {};
    for (const std::uint64_t key : keys) ++counts[((key >> shift) & 0xFF) + 1];
    if (counts[((keys.front() >> shift) & 0xFF) + 1] == keys.size()) continue;
    for (int b = 0; b < 256; ++b) counts[b + 1] += counts[b];
    for (const std::uint64_t key : keys) buffer[counts[(key >> shift) & 0xFF]++] = key;
    keys.swap(buffer);
  }
}

// The keys at sorted positions pos[0..m) (ascending, within [lo, hi)) of the keys from[lo, hi),
// which all lie in [kmin, kmax], written to out[0..m): a radix select. One histogram over about as
// many buckets as keys (at most 1,024), bucket (key - kmin) >> shift, splits the range into
// buckets in sorted order; only the buckets holding a wanted position are moved (into `to`, at
// their places in sorted order) and searched further. `from` and `to` are scratch arrays of the
// same length; both are changed within [lo, hi). Small ranges are sorted; a range of equal keys
// needs nothing.
inline void select_positions(std::uint32_t* from, std::uint32_t* to, std::int64_t lo,
                             std::int64_t hi, std::uint32_t kmin, std::uint32_t kmax,
                             const std::int64_t* pos, std::uint32_t* out, int m) {
  if (m == 0) return;
  if (kmin == kmax) {
    std::fill(out, out + m, kmin);
    return;
  }
  if (hi - lo <= 32) {
    std::sort(from + lo, from + hi);
    for (int j = 0; j < m; ++j) out[j] = from[pos[j]];
    return;
  }
  const int bucket_bits =
      std::min(10, static_cast<int>(std::bit_width(static_cast<std::uint64_t>(hi - lo))));
  const int shift = std::max(0, static_cast<int>(std::bit_width(kmax - kmin)) - bucket_bits);
  const auto buckets = static_cast<std::int64_t>((kmax - kmin) >> shift) + 1;
  std::uint32_t count[1025] = {};
  for (std::int64_t i = lo; i < hi; ++i) ++count[((from[i] - kmin) >> shift) + 1];
  std::int64_t start[1025];
  start[0] = lo;
  for (std::int64_t b = 0; b < buckets; ++b) start[b + 1] = start[b] + count[b + 1];
  bool wanted[1024] = {};
  for (int j = 0; j < m; ++j)
    wanted[std::upper_bound(start + 1, start + buckets + 1, pos[j]) - (start + 1)] = true;
  std::int64_t fill[1024];
  std::copy(start, start + buckets, fill);
  for (std::int64_t i = lo; i < hi; ++i) {
    const std::uint32_t key = from[i];
    const std::uint32_t b = (key - kmin) >> shift;
    if (wanted[b]) to[fill[b]++] = key;
  }
  for (int j = 0; j < m;) {
    const auto b = std::upper_bound(start + 1, start + buckets + 1, pos[j]) - (start + 1);
    int k = j;
    while (k < m && pos[k] < start[b + 1]) ++k;
    const std::uint32_t low = kmin + (static_cast<std::uint32_t>(b) << shift);
    const std::uint32_t high = b + 1 == buckets ? kmax : low + ((std::uint32_t{1} << shift) - 1);
    select_positions(to, from, start[b], start[b + 1], low, high, pos + j, out + j, k - j);
    j = k;
  }
}

}  // namespace pare::internal
