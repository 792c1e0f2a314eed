// Sorting float values with their row numbers by an LSD radix sort on order-preserving keys: the
// per-feature sort of the scores against classes (src/ranking.cpp) and against a continuous target
// (src/target_scores.cpp). Private to the library.
#pragma once

#include <bit>      // std::bit_cast
#include <cstddef>  // std::size_t
#include <cstdint>  // std::uint32_t, std::uint64_t
#include <vector>   // std::vector

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

}  // namespace pare::internal
