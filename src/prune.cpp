#include "pare/prune.h"

#include <algorithm>  // std::clamp, std::max, std::min
#include <cmath>      // std::abs, std::sqrt
#include <numeric>    // std::iota
#include <cstdio>     // std::snprintf
#include <string>     // std::string
#include <utility>    // std::move, std::pair
#include <vector>     // std::vector

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

// Candidates per block. Under a memory budget the block takes at most a sixteenth of it (the
// decisions do not depend on the block size).
std::int64_t block_size(const PruneOptions& options, Eigen::Index n) {
  std::int64_t block = std::max<std::int64_t>(1, options.block);
  if (options.memory_budget > 0)
    block = std::min(block, std::max<std::int64_t>(8, options.memory_budget / (16 * std::max<std::int64_t>(n, 1) * 4)));
  return block;
}

// The rows of the 8-bit looks and the row order the standardised columns are stored in.
struct Subset {
  Eigen::Index rows = 0;            // m: the rows of S, first in `order` (n when there is no bound)
  Eigen::Index rows2 = 0;           // min(n, 2m): the rows of S and S2, first in `order`
  std::vector<Eigen::Index> order;  // row i of a standardised column is row order[i] of the data
  bool bounded = false;             // m < n: the 8-bit first look runs
  bool second_look = false;         // 2m < n: the second look runs too
};

Subset choose_subset(Eigen::Index n, double limit) {
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
  Subset s;
  Eigen::Index m_rows = n;
  if (n >= 64 && limit > 0) {
    double f = 1 - limit;
    for (int i = 0; i < 20; ++i) f = (1 - limit) + 7 * std::sqrt(f / static_cast<double>(n));
    if (f < 0.6) m_rows = static_cast<Eigen::Index>(std::ceil(f * static_cast<double>(n)));
  }
  // Permuted row order: the rows of S first, spread evenly (row floor(i n / m) for i < m), so
  // samples sorted by group do not bias S. Dot products over all rows do not depend on the order.
  s.order.reserve(static_cast<std::size_t>(n));
  std::vector<char> in_subset(static_cast<std::size_t>(n), 0);
  for (Eigen::Index i = 0; i < m_rows; ++i) {
    const Eigen::Index row = i * n / m_rows;
    s.order.push_back(row);
    in_subset[static_cast<std::size_t>(row)] = 1;
  }
  for (Eigen::Index i = 0; i < n; ++i)
    if (!in_subset[static_cast<std::size_t>(i)]) s.order.push_back(i);
  s.rows = m_rows;
  s.bounded = m_rows < n;
  // A second look for the pairs the first cannot rule out: the 8-bit products over the next m rows
  // S2 too, so the rest is R2 = rows from 2m on. At 2,000 x 100,000, 0.6% of the pairs survive the
  // first look and 0.1% of those the second; the exact r of each of the first would read two
  // whole columns, the second look reads m bytes of codes.
  s.rows2 = std::min<Eigen::Index>(n, 2 * m_rows);
  s.second_look = s.bounded && s.rows2 < n;
  return s;
}

// One pruning walk: the candidates go by blocks through standardise_block, a comparison with the
// features kept so far (compare_codes_with_kept with the 8-bit bound, compare_floats_with_kept
// without it), pairs_within_block and walk_block (the sequential walk inside the block), and
// append_kept; the decisions accumulate in out_.
class PruneWalk {
 public:
  PruneWalk(const ConstMatrixRef& m, std::span<const std::int64_t> candidates, const PruneOptions& options);
  PruneResult run();

 private:
  using Compared = std::vector<std::pair<Eigen::Index, float>>;  // (block position, float r)

  Eigen::Map<Matrix> block_columns(std::int64_t width) { return Eigen::Map<Matrix>(zb_storage_.data(), n_, width); }
  const float* col(std::int64_t position) const {
    return m_.col(candidates_[static_cast<std::size_t>(position)]).data();
  }
  double exact(std::int64_t a, std::int64_t b);
  bool decide(std::int64_t c, std::int64_t best, float best_r, const std::vector<std::int64_t>& near);
  void standardise_block(std::int64_t start, std::int64_t width);
  void check_memory(Eigen::Index n_kept, std::int64_t width) const;
  void compare_codes_with_kept(std::int64_t start, std::int64_t width, std::vector<char>& dropped);
  void judge_code_hits(std::int64_t start, Eigen::Index b, const std::vector<internal::PairCodeHit>& hits,
                       std::vector<char>& dropped);
  void compare_floats_with_kept(std::int64_t start, std::int64_t width, std::vector<char>& dropped);
  void pairs_within_block(std::int64_t width);
  void compare_in_block(std::int64_t b, std::int64_t width, const std::vector<Eigen::Index>& block_kept,
                        Compared& compared);
  void rename_partner(std::int64_t start, std::int64_t b, const Compared& compared);
  std::vector<Eigen::Index> walk_block(std::int64_t start, std::int64_t width, const std::vector<char>& dropped);
  void append_kept(std::int64_t start, const std::vector<Eigen::Index>& block_kept);

  const ConstMatrixRef& m_;
  const std::span<const std::int64_t> candidates_;
  const PruneOptions& options_;
  const Eigen::Index n_;
  const std::int64_t count_;
  const double limit_;
  // A float32 dot product of two unit vectors of length n is within about n * 2^-24 of the exact
  // value (a generous bound; the typical error is sqrt(n) times smaller). Pairs inside this margin
  // of the threshold are decided in double.
  const double margin_;
  const int threads_;
  // The bound's own rounding is far inside `margin_`, so a pair is ruled out only when its bound is
  // below limit - 2 margin; the survivors are judged as without it.
  const float cut_;
  const Subset subset_;
  const bool on_disk_;
  const std::int64_t block_;
  PruneResult out_;
  std::vector<Moments> moments_;
  std::vector<std::int64_t> kept_positions_;  // candidate positions of the kept features, in order
  // Without the bound: their standardised columns, column-major n x kept, in a mapping that grows
  // in place (appending columns appends memory) and uses 2 MiB pages: large buffers reallocated
  // per block would spend their time in page faults.
  internal::GrowableBuffer zk_memory_, c_memory_;
  // With it: the 8-bit codes of the block's candidates and of the kept features.
  internal::PairCodeBlock block_codes_;
  internal::PairCodeKept kept_codes_;
  Matrix zb_storage_;  // the block's standardised columns, n x block
  Matrix g_storage_;   // without the bound: the block's Gram matrix
  std::vector<std::vector<std::int32_t>> inner_;  // with it: for b, the earlier j whose bound reaches cut
};

PruneWalk::PruneWalk(const ConstMatrixRef& m, std::span<const std::int64_t> candidates, const PruneOptions& options)
    : m_(m),
      candidates_(candidates),
      options_(options),
      n_(m.rows()),
      count_(static_cast<std::int64_t>(candidates.size())),
      limit_(options.max_corr),
      margin_(1e-6 + 2.0 * static_cast<double>(n_) * 5.96e-8),
      threads_(internal::thread_count(options.threads)),
      cut_(static_cast<float>(limit_ - 2 * margin_)),
      subset_(choose_subset(n_, limit_)),
      on_disk_(internal::any_on_disk()),
      block_(block_size(options, n_)),
      moments_(static_cast<std::size_t>(count_)),
      kept_codes_((subset_.rows + 3) / 4 * 4),
      zb_storage_(n_, std::min<std::int64_t>(block_, std::max<std::int64_t>(count_, 1))) {
  out_.partner.assign(static_cast<std::size_t>(count_), -1);
  out_.r.assign(static_cast<std::size_t>(count_), 0.0);
  out_.kept.assign(static_cast<std::size_t>(count_), 0);
}

// Pearson r of two candidates in double; on disk, their pages are given back at once (these
// checks are few and scattered).
double PruneWalk::exact(std::int64_t a, std::int64_t b) {
  const double r =
      exact_r(col(a), moments_[static_cast<std::size_t>(a)], col(b), moments_[static_cast<std::size_t>(b)], n_);
  if (on_disk_) {
    for (const std::int64_t position : {a, b}) {
      const std::int64_t j = candidates_[static_cast<std::size_t>(position)];
      internal::release_column_span(m_, j, j);
    }
  }
  return r;
}

// Decides whether candidate `c` is dropped by the pairs (kept position, float r) given, and by whom.
bool PruneWalk::decide(std::int64_t c, std::int64_t best, float best_r, const std::vector<std::int64_t>& near) {
  const auto ci = static_cast<std::size_t>(c);
  if (std::abs(best_r) > limit_ + margin_) {
    out_.partner[ci] = best;
    out_.r[ci] = exact(best, c);
    return true;
  }
  // Within the margin: the exact r of every near pair decides; the first (in rank order) of the
  // largest |r| is named.
  double top = -1;
  std::int64_t who = -1;
  for (const std::int64_t k : near) {
    const double r = exact(k, c);
    if (std::abs(r) > limit_ && std::abs(r) > top) {
      top = std::abs(r);
      who = k;
      out_.r[ci] = r;
    }
  }
  if (who < 0) return false;
  out_.partner[ci] = who;
  return true;
}

// Standardises the block: z = (x - mean) / norm in the permuted row order, so z_a . z_b = r, and
// with the bound codes each column for the 8-bit looks. On disk the block is read in file order
// and a 2 MiB window is given back when a thread's walk leaves it (in rank order nearly every
// column would map and drop a whole window).
void PruneWalk::standardise_block(std::int64_t start, std::int64_t width) {
  Eigen::Map<Matrix> zb = block_columns(width);
  const Eigen::Index m_rows = subset_.rows, m2_rows = subset_.rows2;
  const std::vector<Eigen::Index>& order = subset_.order;
  if (subset_.bounded) block_codes_.reset(m_rows, width, subset_.second_look ? m2_rows - m_rows : 0);
  std::vector<std::size_t> visit;
  if (on_disk_) {
    visit = internal::file_order(candidates_.subspan(static_cast<std::size_t>(start), static_cast<std::size_t>(width)));
  } else {
    visit.resize(static_cast<std::size_t>(width));
    std::iota(visit.begin(), visit.end(), std::size_t{0});
  }
#pragma omp parallel num_threads(threads_)
  {
    internal::WindowWalk walk(static_cast<std::size_t>(n_) * sizeof(float));
#pragma omp for schedule(static)
    for (std::size_t at = 0; at < visit.size(); ++at) {
      const auto b = static_cast<std::int64_t>(visit[at]);
      const float* x = col(start + b);
      const Moments mo = moments_of(x, n_);
      moments_[static_cast<std::size_t>(start + b)] = mo;
      const double scale = mo.norm > 0 ? 1.0 / mo.norm : 0.0;
      for (Eigen::Index i = 0; i < n_; ++i)
        zb(i, b) = static_cast<float>((static_cast<double>(x[order[static_cast<std::size_t>(i)]]) - mo.mean) * scale);
      if (subset_.bounded) {
        double rest = 0, rest2 = 0;
        for (Eigen::Index i = m_rows; i < n_; ++i) {
          const double v = static_cast<double>(zb(i, b)) * static_cast<double>(zb(i, b));
          rest += v;
          if (i >= m2_rows) rest2 += v;
        }
        block_codes_.set(b, zb.col(b).data(), std::sqrt(rest), std::sqrt(rest2));
      }
      walk.visited(x);
    }
  }
}

// The kept set is compared with every later candidate, so it must stay in memory: its codes with
// the bound, else its standardised columns. Past the budget: Error(kUsage).
void PruneWalk::check_memory(Eigen::Index n_kept, std::int64_t width) const {
  const std::int64_t per_kept = subset_.bounded ? block_codes_.padded() + block_codes_.padded2()
                                                : n_ * static_cast<std::int64_t>(sizeof(float));
  const std::int64_t need = n_kept * per_kept + width * n_ * static_cast<std::int64_t>(sizeof(float));
  if (need > options_.memory_budget)
    throw Error(ErrorKind::kUsage,
                "correlation pruning needs its " + std::to_string(n_kept) + " kept features in memory (" +
                    size_text(need) + " with the block being compared), more than `memory` allows (" +
                    size_text(options_.memory_budget) +
                    "); raise `memory`, cap the kept set with `keep`, or prune harder with a lower `max_corr`");
}

// First look: the 8-bit bound over S (internal/pair_screen.h) for every (kept, candidate) pair, in
// tasks of 64 candidates that walk the kept set in chunks of 1,024 features (their codes stay in
// cache while the task's candidates pass over them); the pairs it cannot rule out go to
// judge_code_hits.
void PruneWalk::compare_codes_with_kept(std::int64_t start, std::int64_t width, std::vector<char>& dropped) {
  constexpr Eigen::Index kTiles = 8, kChunk = 64;  // tiles of 8 candidates per task; groups of 16 per chunk
  const Eigen::Index tiles = (width + internal::kPairCodeTile - 1) / internal::kPairCodeTile;
  const Eigen::Index groups = kept_codes_.groups();
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads_)
  for (Eigen::Index task = 0; task < (tiles + kTiles - 1) / kTiles; ++task) {
    const Eigen::Index t0 = task * kTiles, t1 = std::min(tiles, t0 + kTiles);
    std::vector<internal::PairCodeSurvivors> survivors(static_cast<std::size_t>(t1 - t0));
    for (Eigen::Index g0 = 0; g0 < groups; g0 += kChunk)
      for (Eigen::Index t = t0; t < t1; ++t) {
        const Eigen::Index first = t * internal::kPairCodeTile;
        const auto tile_width = static_cast<int>(std::min<Eigen::Index>(internal::kPairCodeTile, width - first));
        internal::pair_code_find(kept_codes_, block_codes_, cut_, first, tile_width, g0,
                                 std::min(groups, g0 + kChunk), survivors[static_cast<std::size_t>(t - t0)]);
      }
    for (Eigen::Index t = t0; t < t1; ++t)
      for (int c = 0; c < internal::kPairCodeTile; ++c) {
        const Eigen::Index b = t * internal::kPairCodeTile + c;
        if (b >= width) break;
        judge_code_hits(start, b, survivors[static_cast<std::size_t>(t - t0)][static_cast<std::size_t>(c)], dropped);
      }
  }
}

// The few pairs both 8-bit looks leave for block candidate b are decided by their exact r (double,
// from the data): the kept feature of largest |r| above the threshold, the first in rank order on
// a tie.
void PruneWalk::judge_code_hits(std::int64_t start, Eigen::Index b, const std::vector<internal::PairCodeHit>& hits,
                                std::vector<char>& dropped) {
  std::int64_t best = -1;
  double best_r = 0;
  for (const internal::PairCodeHit& hit : hits) {
    // Second look: the 8-bit products over the next rows too.
    if (subset_.second_look && internal::pair_code_second_bound(kept_codes_, block_codes_, b, hit) < cut_) continue;
    const std::int64_t kept_at = kept_positions_[static_cast<std::size_t>(hit.k)];
    const double r = exact(kept_at, start + b);
    if (std::abs(r) > limit_ && (best < 0 || std::abs(r) > std::abs(best_r))) {
      best = kept_at;
      best_r = r;
    }
  }
  if (best >= 0) {
    out_.partner[static_cast<std::size_t>(start + b)] = best;
    out_.r[static_cast<std::size_t>(start + b)] = best_r;
    dropped[static_cast<std::size_t>(b)] = 1;
  }
}

// Without the bound: the block against the kept set in one float product (kept x block); a
// candidate whose largest |r| comes within the margin of the threshold goes to decide.
void PruneWalk::compare_floats_with_kept(std::int64_t start, std::int64_t width, std::vector<char>& dropped) {
  const auto n_kept = static_cast<Eigen::Index>(kept_positions_.size());
  Eigen::Map<Matrix> zb = block_columns(width);
  c_memory_.reserve(static_cast<std::size_t>(n_kept * width) * sizeof(float));
  Eigen::Map<Matrix> c(reinterpret_cast<float*>(c_memory_.data()), n_kept, width);  // n_kept x width
  const Eigen::Map<const Matrix> zk(reinterpret_cast<const float*>(zk_memory_.data()), n_, n_kept);
  internal::product_tn(zk, zb, c, threads_);
#pragma omp parallel for schedule(dynamic, 16) num_threads(threads_)
  for (std::int64_t b = 0; b < width; ++b) {
    std::int64_t best = -1;
    float best_r = 0;
    std::vector<std::int64_t> near;
    for (Eigen::Index k = 0; k < n_kept; ++k) {
      const float r = c(k, b);
      if (std::abs(r) > std::abs(best_r) || best < 0) {
        best_r = r;
        best = kept_positions_[static_cast<std::size_t>(k)];
      }
      if (std::abs(r) > limit_ - margin_) near.push_back(kept_positions_[static_cast<std::size_t>(k)]);
    }
    if (best >= 0 && std::abs(best_r) > limit_ - margin_)
      dropped[static_cast<std::size_t>(b)] = decide(start + b, best, best_r, near);
  }
}

// Within the block the walk is sequential: a survivor is compared with the block's earlier
// survivors, through the block's own Gram matrix (g_storage_) or, with the bound, through full
// products of the pairs the bound does not rule out (inner_: found all at once here, so the walk
// stays cheap).
void PruneWalk::pairs_within_block(std::int64_t width) {
  Eigen::Map<Matrix> zb = block_columns(width);
  if (subset_.bounded) {
    internal::PairCodeKept codes(block_codes_.padded());
    for (Eigen::Index b = 0; b < width; ++b) codes.append(block_codes_, b);
    inner_.assign(static_cast<std::size_t>(width), {});
    const Eigen::Index tiles = (width + internal::kPairCodeTile - 1) / internal::kPairCodeTile;
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads_)
    for (Eigen::Index t = 0; t < tiles; ++t) {
      const Eigen::Index first = t * internal::kPairCodeTile;
      const auto tile_width = static_cast<int>(std::min<Eigen::Index>(internal::kPairCodeTile, width - first));
      internal::PairCodeSurvivors found;
      internal::pair_code_find(codes, block_codes_, cut_, first, tile_width, 0, (first + tile_width + 15) / 16, found);
      for (int c = 0; c < tile_width; ++c)
        for (const internal::PairCodeHit& hit : found[static_cast<std::size_t>(c)])
          if (hit.k < first + c) inner_[static_cast<std::size_t>(first + c)].push_back(hit.k);
    }
  } else {
    g_storage_.resize(width, width);
    Eigen::Map<Matrix> g(g_storage_.data(), width, width);
    internal::product_tn(zb, zb, g, threads_);
  }
}

// The block's kept candidates that b is compared with, and their float r.
void PruneWalk::compare_in_block(std::int64_t b, std::int64_t width, const std::vector<Eigen::Index>& block_kept,
                                 Compared& compared) {
  compared.clear();
  if (!subset_.bounded) {
    for (const Eigen::Index j : block_kept) compared.emplace_back(j, g_storage_(j, b));
    return;
  }
  Eigen::Map<Matrix> zb = block_columns(width);
  // block_kept and inner_[b] both ascend: their intersection.
  const auto& near_b = inner_[static_cast<std::size_t>(b)];
  auto it = near_b.begin();
  for (const Eigen::Index j : block_kept) {
    while (it != near_b.end() && *it < j) ++it;
    if (it == near_b.end()) break;
    if (*it == j) compared.emplace_back(j, zb.col(j).dot(zb.col(b)));
  }
}

// Block candidate b was already dropped by an earlier block's feature; names the most correlated
// kept feature, whichever block it is in (earlier rank wins a tie), so the name does not depend on
// the block size.
void PruneWalk::rename_partner(std::int64_t start, std::int64_t b, const Compared& compared) {
  const auto ci = static_cast<std::size_t>(start + b);
  for (const auto& [j, g] : compared) {
    if (std::abs(g) < std::abs(out_.r[ci]) - margin_) continue;
    const double r = exact(start + j, start + b);
    if (std::abs(r) > std::abs(out_.r[ci])) {
      out_.r[ci] = r;
      out_.partner[ci] = start + j;
    }
  }
}

// The sequential walk through the block in rank order; returns the block positions it keeps.
std::vector<Eigen::Index> PruneWalk::walk_block(std::int64_t start, std::int64_t width,
                                                const std::vector<char>& dropped) {
  std::vector<Eigen::Index> block_kept;
  Compared compared;
  for (std::int64_t b = 0; b < width; ++b) {
    if (options_.max_kept > 0 &&
        static_cast<std::int64_t>(kept_positions_.size() + block_kept.size()) >= options_.max_kept)
      break;
    out_.examined = start + b + 1;
    compare_in_block(b, width, block_kept, compared);
    if (dropped[static_cast<std::size_t>(b)]) {
      rename_partner(start, b, compared);
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
      if (std::abs(r) > limit_ - margin_) near.push_back(start + j);
    }
    if (best >= 0 && std::abs(best_r) > limit_ - margin_ && decide(start + b, best, best_r, near)) continue;
    block_kept.push_back(b);
  }
  return block_kept;
}

// Appends the block's survivors to the kept set: their codes with the bound, else their
// standardised columns (the mapping grows in place).
void PruneWalk::append_kept(std::int64_t start, const std::vector<Eigen::Index>& block_kept) {
  const auto n_kept = static_cast<Eigen::Index>(kept_positions_.size());
  const auto new_kept = n_kept + static_cast<Eigen::Index>(block_kept.size());
  if (!subset_.bounded) zk_memory_.reserve(static_cast<std::size_t>(new_kept * n_) * sizeof(float));
  for (std::size_t t = 0; t < block_kept.size(); ++t) {
    if (subset_.bounded) {
      kept_codes_.append(block_codes_, block_kept[t]);
    } else {
      Eigen::Map<Matrix> zk(reinterpret_cast<float*>(zk_memory_.data()), n_, new_kept);
      zk.col(n_kept + static_cast<Eigen::Index>(t)) = zb_storage_.col(block_kept[t]);
    }
    kept_positions_.push_back(start + block_kept[t]);
    out_.kept[static_cast<std::size_t>(start + block_kept[t])] = 1;
  }
}

PruneResult PruneWalk::run() {
  ProgressStep progress("pruning", count_, "candidates");
  for (std::int64_t start = 0; start < count_; start += block_) {
    if (options_.max_kept > 0 && static_cast<std::int64_t>(kept_positions_.size()) >= options_.max_kept) break;
    const std::int64_t width = std::min(block_, count_ - start);
    standardise_block(start, width);
    const auto n_kept = static_cast<Eigen::Index>(kept_positions_.size());
    if (options_.memory_budget > 0) check_memory(n_kept, width);
    std::vector<char> dropped(static_cast<std::size_t>(width), 0);
    if (n_kept > 0 && subset_.bounded)
      compare_codes_with_kept(start, width, dropped);
    else if (n_kept > 0)
      compare_floats_with_kept(start, width, dropped);
    pairs_within_block(width);
    append_kept(start, walk_block(start, width, dropped));
    progress.add(width);
  }
  // The block product above also judged the block's candidates past the point where max_kept
  // stopped the walk; they were not examined, so they carry no partner.
  for (auto c = static_cast<std::size_t>(out_.examined); c < static_cast<std::size_t>(count_); ++c) {
    out_.partner[c] = -1;
    out_.r[c] = 0;
  }
  return std::move(out_);
}

}  // namespace

PruneResult prune_correlated(const ConstMatrixRef& m, std::span<const std::int64_t> candidates,
                             const PruneOptions& options) {
  if (!(options.max_corr >= 0 && options.max_corr <= 1))
    throw_usage_error("`max_corr` must be between 0 and 1");
  return PruneWalk(m, candidates, options).run();
}

}  // namespace pare
