#include "pare/prune.h"

#include <algorithm>  // std::clamp, std::max, std::min
#include <cmath>      // std::abs, std::sqrt
#include <numeric>    // std::iota
#include <cstdio>     // std::snprintf
#include <string>     // std::string

#include "internal/columns.h"
#include "internal/gemm.h"
#include "internal/growable_buffer.h"
#include "internal/omp.h"
#include "internal/pair_screen.h"
#include "kernels/kernels.h"
#include "pare/error.h"
#include "pare/progress.h"

namespace pare {

namespace {

// Mean and root of the centred sum of squares of a column, in double (kernels::moments: the same
// bits on every instruction-set level).
using Moments = kernels::Moments;

Moments moments_of(const float* x, Eigen::Index n) { return kernels::moments(x, n); }

// Pearson r of two columns, in double.
double exact_r(const float* a, const Moments& ma, const float* b, const Moments& mb, Eigen::Index n) {
  if (ma.norm == 0 || mb.norm == 0) return 0;
  const double s = kernels::centered_dot(a, ma.mean, b, mb.mean, n);
  // Rounding can put an exact copy at 1 + 2^-52; |r| <= 1 by definition, and --max-corr 1 must
  // keep copies whichever way the rounding falls.
  return std::clamp(s / (ma.norm * mb.norm), -1.0, 1.0);
}

// "512 KiB", "3.2 MiB", "1.5 GiB".
std::string size_text(std::int64_t bytes) {
  char text[32];
  const auto b = static_cast<double>(bytes);
  if (bytes < (1 << 20))
    std::snprintf(text, sizeof text, "%.0f KiB", b / 1024);
  else if (bytes < (std::int64_t{1} << 30))
    std::snprintf(text, sizeof text, "%.1f MiB", b / (1 << 20));
  else
    std::snprintf(text, sizeof text, "%.1f GiB", b / (1 << 30));
  return text;
}

}  // namespace

PruneResult prune_correlated(const ConstMatrixRef& m, std::span<const std::int64_t> candidates,
                             const PruneOptions& options) {
  if (!(options.max_corr >= 0 && options.max_corr <= 1))
    throw_usage_error("`max_corr` must be between 0 and 1");
  const Eigen::Index n = m.rows();
  const auto count = static_cast<std::int64_t>(candidates.size());
  const double limit = options.max_corr;
  // A float32 dot product of two unit vectors of length n is within about n * 2^-24 of the exact
  // value (a generous bound; the typical error is sqrt(n) times smaller). Pairs inside this margin
  // of the threshold are decided in double.
  const double margin = 1e-6 + 2.0 * static_cast<double>(n) * 5.96e-8;
  const int threads = internal::thread_count(options.threads);
  // The bound's own rounding is far inside `margin`, so a pair is ruled out only when its bound is
  // below limit - 2 margin; the survivors are judged as without it.
  const float cut = static_cast<float>(limit - 2 * margin);

  // A cheaper first look. Split the samples into a subset S of m rows and the rest R. For
  // standardised columns a and b, Cauchy-Schwarz on R gives
  //   |r| = |a_S . b_S + a_R . b_R| <= |a_S . b_S| + |a_R| |b_R|,
  // so a product over S alone (m/n of the work, and in 8-bit codes with a rigorous allowance for
  // their rounding: internal/pair_screen.h) rules out every pair whose bound stays below the
  // threshold; only the pairs it cannot rule out get the full dot product. For unrelated
  // features |a_R| |b_R| is about 1 - m/n and a_S . b_S about sqrt(m)/n, so S is sized to leave
  // a gap of seven such standard deviations below the threshold: m/n = (1 - limit) +
  // 7 sqrt((m/n)/n), 169 of 1,000 rows or 336 of 2,000 at 0.9. Seven to twelve standard
  // deviations measured the same at 2,000 x 100,000 (more rows cost the 8-bit product what fewer
  // survivors save); four and five took twice as long, as heavy-tailed features, whose few large
  // values often fall outside S, get past a narrow gap.
  Eigen::Index m_rows = n;
  if (n >= 64 && limit > 0) {
    double f = 1 - limit;
    for (int i = 0; i < 20; ++i) f = (1 - limit) + 7 * std::sqrt(f / static_cast<double>(n));
    if (f < 0.6) m_rows = static_cast<Eigen::Index>(std::ceil(f * static_cast<double>(n)));
  }
  // Permuted row order: the rows of S first, spread evenly (row floor(i n / m) for i < m), so
  // samples sorted by group do not bias S. Dot products over all rows do not depend on the order.
  std::vector<Eigen::Index> order;
  order.reserve(static_cast<std::size_t>(n));
  std::vector<char> in_subset(static_cast<std::size_t>(n), 0);
  for (Eigen::Index i = 0; i < m_rows; ++i) {
    const Eigen::Index row = i * n / m_rows;
    order.push_back(row);
    in_subset[static_cast<std::size_t>(row)] = 1;
  }
  for (Eigen::Index i = 0; i < n; ++i)
    if (!in_subset[static_cast<std::size_t>(i)]) order.push_back(i);
  const bool bounded = m_rows < n;

  PruneResult out;
  out.partner.assign(static_cast<std::size_t>(count), -1);
  out.r.assign(static_cast<std::size_t>(count), 0.0);
  out.kept.assign(static_cast<std::size_t>(count), 0);

  std::vector<Moments> moments(static_cast<std::size_t>(count));
  // A second look for the pairs the first cannot rule out: the 8-bit products over the next m rows
  // S2 too, so the rest is R2 = rows from 2m on. At 2,000 x 100,000, 0.6% of the pairs survive the
  // first look and 0.1% of those the second; the exact r of each of the first would read two
  // whole columns, the second look reads m bytes of codes.
  const Eigen::Index m2_rows = std::min<Eigen::Index>(n, 2 * m_rows);
  const bool second_look = bounded && m2_rows < n;
  std::vector<std::int64_t> kept_positions;  // candidate positions of the kept features, in order
  // Without the bound: their standardised columns, column-major n x kept, in a mapping that grows
  // in place (appending columns appends memory) and uses 2 MiB pages: large buffers reallocated
  // per block would spend their time in page faults.
  internal::GrowableBuffer zk_memory, c_memory;
  // With it: the 8-bit codes of the block's candidates and of the kept features.
  internal::ScreenBlock screen_block;
  internal::ScreenKept screen_kept((m_rows + 3) / 4 * 4);

  Matrix g_storage;
  // Under a memory budget the candidate block takes at most a sixteenth of it (the decisions do
  // not depend on the block size).
  std::int64_t block = std::max<std::int64_t>(1, options.block);
  if (options.memory_budget > 0)
    block = std::min(block, std::max<std::int64_t>(8, options.memory_budget / (16 * std::max<std::int64_t>(n, 1) * 4)));
  Matrix zb_storage(n, std::min<std::int64_t>(block, std::max<std::int64_t>(count, 1)));
  const bool on_disk = internal::any_on_disk();
  auto col = [&](std::int64_t position) { return m.col(candidates[static_cast<std::size_t>(position)]).data(); };
  auto release = [&](std::int64_t position) {
    const std::int64_t j = candidates[static_cast<std::size_t>(position)];
    internal::release_column_span(m, j, j);
  };
  // Pearson r of two candidates in double; on disk, their pages are given back at once (these
  // checks are few and scattered).
  auto exact = [&](std::int64_t a, std::int64_t b) {
    const double r = exact_r(col(a), moments[static_cast<std::size_t>(a)], col(b), moments[static_cast<std::size_t>(b)], n);
    if (on_disk) {
      release(a);
      release(b);
    }
    return r;
  };

  // Decides whether candidate `c` is dropped by the pairs (kept position, float r) given, and by whom.
  auto decide = [&](std::int64_t c, std::int64_t best, float best_r, const std::vector<std::int64_t>& near) {
    const auto ci = static_cast<std::size_t>(c);
    if (std::abs(best_r) > limit + margin) {
      out.partner[ci] = best;
      out.r[ci] = exact(best, c);
      return true;
    }
    // Within the margin: the exact r of every near pair decides; the first (in rank order) of the
    // largest |r| is named.
    double top = -1;
    std::int64_t who = -1;
    for (const std::int64_t k : near) {
      const double r = exact(k, c);
      if (std::abs(r) > limit && std::abs(r) > top) {
        top = std::abs(r);
        who = k;
        out.r[ci] = r;
      }
    }
    if (who < 0) return false;
    out.partner[ci] = who;
    return true;
  };

  ProgressStep progress("pruning", count, "candidates");
  for (std::int64_t start = 0; start < count; start += block) {
    if (options.max_kept > 0 && static_cast<std::int64_t>(kept_positions.size()) >= options.max_kept) break;
    const std::int64_t width = std::min(block, count - start);
    // Standardise the block: z = (x - mean) / norm, so z_a . z_b = r.
    Eigen::Map<Matrix> zb(zb_storage.data(), n, width);
    if (bounded) screen_block.reset(m_rows, width, second_look ? m2_rows - m_rows : 0);
    // On disk the block is read in file order and a 2 MiB window is given back when a thread's
    // walk leaves it (in rank order nearly every column would map and drop a whole window).
    std::vector<std::size_t> visit;
    if (on_disk) {
      visit = internal::file_order(candidates.subspan(static_cast<std::size_t>(start), static_cast<std::size_t>(width)));
    } else {
      visit.resize(static_cast<std::size_t>(width));
      std::iota(visit.begin(), visit.end(), std::size_t{0});
    }
#pragma omp parallel num_threads(threads)
    {
      internal::WindowWalk walk(static_cast<std::size_t>(n) * sizeof(float));
#pragma omp for schedule(static)
    for (std::size_t at = 0; at < visit.size(); ++at) {
      const auto b = static_cast<std::int64_t>(visit[at]);
      const float* x = col(start + b);
      const Moments mo = moments_of(x, n);
      moments[static_cast<std::size_t>(start + b)] = mo;
      const double scale = mo.norm > 0 ? 1.0 / mo.norm : 0.0;
      for (Eigen::Index i = 0; i < n; ++i)
        zb(i, b) = static_cast<float>((static_cast<double>(x[order[static_cast<std::size_t>(i)]]) - mo.mean) * scale);
      if (bounded) {
        double rest = 0, rest2 = 0;
        for (Eigen::Index i = m_rows; i < n; ++i) {
          const double v = static_cast<double>(zb(i, b)) * static_cast<double>(zb(i, b));
          rest += v;
          if (i >= m2_rows) rest2 += v;
        }
        screen_block.set(b, zb.col(b).data(), std::sqrt(rest), std::sqrt(rest2));
      }
      walk.visited(x);
    }
    }
    const auto n_kept = static_cast<Eigen::Index>(kept_positions.size());
    if (options.memory_budget > 0) {
      // The kept set is compared with every later candidate, so it must stay in memory: its codes
      // with the bound, else its standardised columns.
      const std::int64_t per_kept = bounded ? screen_block.padded() + screen_block.padded2()
                                            : n * static_cast<std::int64_t>(sizeof(float));
      const std::int64_t need = n_kept * per_kept + width * n * static_cast<std::int64_t>(sizeof(float));
      if (need > options.memory_budget)
        throw Error(ErrorKind::kUsage,
                    "correlation pruning needs its " + std::to_string(n_kept) + " kept features in memory (" +
                        size_text(need) + " with the block being compared), more than `memory` allows (" +
                        size_text(options.memory_budget) +
                        "); raise `memory`, cap the kept set with `keep`, or prune harder with a lower `max_corr`");
    }
    std::vector<char> dropped(static_cast<std::size_t>(width), 0);
    if (n_kept > 0 && bounded) {
      // First look: the 8-bit bound over S (internal/pair_screen.h) for every pair, in tasks of
      // 64 candidates that walk the kept set in chunks of 1,024 features (their codes stay in
      // cache while the task's candidates pass over them).
      constexpr Eigen::Index kTiles = 8, kChunk = 64;  // tiles of 8 candidates per task; groups of 16 per chunk
      const Eigen::Index tiles = (width + internal::kScreenTile - 1) / internal::kScreenTile;
      const Eigen::Index groups = screen_kept.groups();
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
      for (Eigen::Index task = 0; task < (tiles + kTiles - 1) / kTiles; ++task) {
        const Eigen::Index t0 = task * kTiles, t1 = std::min(tiles, t0 + kTiles);
        std::vector<internal::ScreenSurvivors> survivors(static_cast<std::size_t>(t1 - t0));
        for (Eigen::Index g0 = 0; g0 < groups; g0 += kChunk)
          for (Eigen::Index t = t0; t < t1; ++t) {
            const Eigen::Index first = t * internal::kScreenTile;
            const auto tile_width = static_cast<int>(std::min<Eigen::Index>(internal::kScreenTile, width - first));
            internal::screen_pairs(screen_kept, screen_block, cut, first, tile_width, g0,
                                   std::min(groups, g0 + kChunk), survivors[static_cast<std::size_t>(t - t0)]);
          }
        for (Eigen::Index t = t0; t < t1; ++t)
          for (int c = 0; c < internal::kScreenTile; ++c) {
            const Eigen::Index b = t * internal::kScreenTile + c;
            if (b >= width) break;
            // The few pairs both looks leave are decided by their exact r (double, from the data):
            // the kept feature of largest |r| above the threshold, the first in rank order on a tie.
            std::int64_t best = -1;
            double best_r = 0;
            for (const internal::ScreenHit& hit : survivors[static_cast<std::size_t>(t - t0)][static_cast<std::size_t>(c)]) {
              // Second look: the 8-bit products over the next rows too.
              if (second_look && internal::screen_second_bound(screen_kept, screen_block, b, hit) < cut) continue;
              const std::int64_t kept_at = kept_positions[static_cast<std::size_t>(hit.k)];
              const double r = exact(kept_at, start + b);
              if (std::abs(r) > limit && (best < 0 || std::abs(r) > std::abs(best_r))) {
                best = kept_at;
                best_r = r;
              }
            }
            if (best >= 0) {
              out.partner[static_cast<std::size_t>(start + b)] = best;
              out.r[static_cast<std::size_t>(start + b)] = best_r;
              dropped[static_cast<std::size_t>(b)] = 1;
            }
          }
      }
    } else if (n_kept > 0) {
      c_memory.reserve(static_cast<std::size_t>(n_kept * width) * sizeof(float));
      Eigen::Map<Matrix> c(reinterpret_cast<float*>(c_memory.data()), n_kept, width);  // n_kept x width
      const Eigen::Map<const Matrix> zk(reinterpret_cast<const float*>(zk_memory.data()), n, n_kept);
      internal::product_tn(zk, zb, c, threads);
#pragma omp parallel for schedule(dynamic, 16) num_threads(threads)
      for (std::int64_t b = 0; b < width; ++b) {
        std::int64_t best = -1;
        float best_r = 0;
        std::vector<std::int64_t> near;
        for (Eigen::Index k = 0; k < n_kept; ++k) {
          const float r = c(k, b);
          if (std::abs(r) > std::abs(best_r) || best < 0) {
            best_r = r;
            best = kept_positions[static_cast<std::size_t>(k)];
          }
          if (std::abs(r) > limit - margin) near.push_back(kept_positions[static_cast<std::size_t>(k)]);
        }
        if (best >= 0 && std::abs(best_r) > limit - margin)
          dropped[static_cast<std::size_t>(b)] = decide(start + b, best, best_r, near);
      }
    }
    // Within the block the walk is sequential: a survivor is compared with the block's earlier
    // survivors, through the block's own Gram matrix or, with the bound, through full products of
    // the pairs the bound does not rule out (screened all at once here, so the walk stays cheap).
    std::vector<std::vector<std::int32_t>> inner;  // bounded: for b, the earlier j whose bound reaches cut
    if (bounded) {
      internal::ScreenKept codes(screen_block.padded());
      for (Eigen::Index b = 0; b < width; ++b) codes.append(screen_block, b);
      inner.assign(static_cast<std::size_t>(width), {});
      const Eigen::Index tiles = (width + internal::kScreenTile - 1) / internal::kScreenTile;
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
      for (Eigen::Index t = 0; t < tiles; ++t) {
        const Eigen::Index first = t * internal::kScreenTile;
        const auto tile_width = static_cast<int>(std::min<Eigen::Index>(internal::kScreenTile, width - first));
        internal::ScreenSurvivors found;
        internal::screen_pairs(codes, screen_block, cut, first, tile_width, 0, (first + tile_width + 15) / 16, found);
        for (int c = 0; c < tile_width; ++c)
          for (const internal::ScreenHit& hit : found[static_cast<std::size_t>(c)])
            if (hit.k < first + c) inner[static_cast<std::size_t>(first + c)].push_back(hit.k);
      }
    } else {
      g_storage.resize(width, width);
      Eigen::Map<Matrix> g(g_storage.data(), width, width);
      internal::product_tn(zb, zb, g, threads);
    }
    // The block's kept candidates that b is compared with, and their float r.
    std::vector<Eigen::Index> block_kept;
    std::vector<std::pair<Eigen::Index, float>> compared;
    auto compare = [&](std::int64_t b) {
      compared.clear();
      if (!bounded) {
        for (const Eigen::Index j : block_kept) compared.emplace_back(j, g_storage(j, b));
        return;
      }
      // block_kept and inner[b] both ascend: their intersection.
      const auto& near_b = inner[static_cast<std::size_t>(b)];
      auto it = near_b.begin();
      for (const Eigen::Index j : block_kept) {
        while (it != near_b.end() && *it < j) ++it;
        if (it == near_b.end()) break;
        if (*it == j) compared.emplace_back(j, zb.col(j).dot(zb.col(b)));
      }
    };
    for (std::int64_t b = 0; b < width; ++b) {
      if (options.max_kept > 0 && static_cast<std::int64_t>(kept_positions.size() + block_kept.size()) >= options.max_kept)
        break;
      out.examined = start + b + 1;
      compare(b);
      if (dropped[static_cast<std::size_t>(b)]) {
        // Already dropped by an earlier block's feature; name the most correlated kept feature,
        // whichever block it is in (earlier rank wins a tie), so the name does not depend on the
        // block size.
        const auto ci = static_cast<std::size_t>(start + b);
        for (const auto& [j, g] : compared) {
          if (std::abs(g) < std::abs(out.r[ci]) - margin) continue;
          const double r = exact(start + j, start + b);
          if (std::abs(r) > std::abs(out.r[ci])) {
            out.r[ci] = r;
            out.partner[ci] = start + j;
          }
        }
        continue;
      }
      std::int64_t best = -1;
      float best_r = 0;
      std::vector<std::int64_t> near;
      for (const auto& [j, r] : compared) {
        if (std::abs(r) > std::abs(best_r) || best < 0) {
          best_r = r;
          best = start + j;
        }
        if (std::abs(r) > limit - margin) near.push_back(start + j);
      }
      if (best >= 0 && std::abs(best_r) > limit - margin && decide(start + b, best, best_r, near)) continue;
      block_kept.push_back(b);
    }
    // Append the block's survivors to the kept set: their codes with the bound, else their
    // standardised columns (the mapping grows in place).
    const auto new_kept = n_kept + static_cast<Eigen::Index>(block_kept.size());
    if (!bounded) zk_memory.reserve(static_cast<std::size_t>(new_kept * n) * sizeof(float));
    for (std::size_t t = 0; t < block_kept.size(); ++t) {
      if (bounded) {
        screen_kept.append(screen_block, block_kept[t]);
      } else {
        Eigen::Map<Matrix> zk(reinterpret_cast<float*>(zk_memory.data()), n, new_kept);
        zk.col(n_kept + static_cast<Eigen::Index>(t)) = zb.col(block_kept[t]);
      }
      kept_positions.push_back(start + block_kept[t]);
      out.kept[static_cast<std::size_t>(start + block_kept[t])] = 1;
    }
    progress.add(width);
  }
  // The block product above also judged the block's candidates past the point where max_kept
  // stopped the walk; they were not examined, so they carry no partner.
  for (auto c = static_cast<std::size_t>(out.examined); c < static_cast<std::size_t>(count); ++c) {
    out.partner[c] = -1;
    out.r[c] = 0;
  }
  return out;
}

}  // namespace pare
