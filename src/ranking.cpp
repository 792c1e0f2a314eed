#include "pare/ranking.h"

#include <boost/math/distributions/chi_squared.hpp>
#include <boost/math/distributions/fisher_f.hpp>

#include <algorithm>  // std::sort, std::stable_sort, std::partition_point
#include <cmath>      // std::log, std::isnan, std::isinf, std::isfinite
#include <exception>  // std::exception_ptr, std::current_exception, std::rethrow_exception
#include <limits>     // std::numeric_limits
#include <numeric>    // std::iota

#include "internal/format.h"
#include "internal/omp.h"
#include "internal/class_scores.h"
#include "internal/columns.h"
#include "pare/error.h"
#include "pare/progress.h"

namespace pare {

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// Boost.Math evaluates double functions in long double by default; double is accurate to a few ulp
// here and several times faster (the tails are evaluated for every feature).
using DoublePolicy = boost::math::policies::policy<boost::math::policies::promote_double<false>>;

using internal::defined_bit;

}  // namespace

Criterion parse_criterion(const std::string& name) {
  if (name == "mi") return Criterion::kMi;
  if (name == "chi2") return Criterion::kChi2;
  if (name == "chi2-counts") return Criterion::kChi2Counts;
  if (name == "f") return Criterion::kF;
  if (name == "variance") return Criterion::kVariance;
  if (name == "pearson") return Criterion::kPearson;
  if (name == "spearman") return Criterion::kSpearman;
  throw_usage_error("`rank_by` " + name + " is not one of mi, chi2, chi2-counts, f, variance (classes), "
                    "pearson, spearman, mi, variance (a continuous target)");
}

const char* criterion_name(Criterion c) {
  switch (c) {
    case Criterion::kMi: return "mi";
    case Criterion::kChi2: return "chi2";
    case Criterion::kChi2Counts: return "chi2-counts";
    case Criterion::kF: return "f";
    case Criterion::kPearson: return "pearson";
    case Criterion::kSpearman: return "spearman";
    case Criterion::kVariance: break;
  }
  return "variance";
}

std::vector<int> equal_frequency_bins(std::span<const double> values, int bins) {
  const std::size_t n = values.size();
  std::vector<std::size_t> order(n);
  std::iota(order.begin(), order.end(), std::size_t{0});
  std::stable_sort(order.begin(), order.end(),
                   [&](std::size_t a, std::size_t b) { return values[a] < values[b]; });
  std::vector<int> bin(n);
  std::size_t start = 0;  // L(x): values strictly less than the current run
  for (std::size_t i = 0; i < n; ++i) {
    if (i > 0 && values[order[i]] != values[order[i - 1]]) start = i;
    bin[order[i]] = static_cast<int>(static_cast<std::uint64_t>(bins) * start / n);
  }
  return bin;
}

namespace {

// Row sums, column sums and total of a rows x cols table given row-major.
struct Margins {
  std::vector<double> row_sum, col_sum;
  double total = 0;
};

Margins margins_of(std::span<const double> table, int rows, int cols) {
  Margins m;
  m.row_sum.assign(static_cast<std::size_t>(rows), 0.0);
  m.col_sum.assign(static_cast<std::size_t>(cols), 0.0);
  for (int r = 0; r < rows; ++r)
    for (int c = 0; c < cols; ++c) {
      const double v = table[static_cast<std::size_t>(r * cols + c)];
      m.row_sum[static_cast<std::size_t>(r)] += v;
      m.col_sum[static_cast<std::size_t>(c)] += v;
      m.total += v;
    }
  return m;
}

}  // namespace

namespace {

// v ln v in long double, for v >= 0; whole counts (every cell of a bin x class table) from a
// per-thread table grown on demand, computed once by the same expression, so the bits are those of
// computing it each time (the scores of many subsets evaluate millions of these).
long double x_log_x(double v) {
  constexpr double kLargest = 1 << 22;
  if (v == std::floor(v) && v < kLargest) {
    thread_local std::vector<long double> table{0.0L};
    const auto i = static_cast<std::size_t>(v);
    while (table.size() <= i) {
      const auto x = static_cast<long double>(table.size());
      table.push_back(x * std::log(x));
    }
    return table[i];
  }
  return static_cast<long double>(v) * std::log(static_cast<long double>(v));
}

}  // namespace

double mutual_information(std::span<const double> table, int rows, int cols) {
  const auto [row_sum, col_sum, total] = margins_of(table, rows, cols);
  if (total <= 0) return 0;
  // MI = (sum v ln v - sum r ln r - sum c ln c + N ln N) / N over the cells v, row totals r and
  // column totals c. Each sum runs over its values in ascending order, so two tables with the same
  // multisets of cells and totals (equal MI in exact arithmetic) get the same bits, and the
  // ranking breaks such ties by input order rather than by rounding.
  // The four sums are of size N ln N and MI is their small difference, so they are formed in
  // long double (64-bit mantissa on x86): the cancellation then costs about 1e-19 N ln N instead
  // of 1e-16, which keeps tiny MIs accurate to well under 1e-12 relative.
  thread_local std::vector<double> sorted;
  auto sum_x_log_x = [](std::span<const double> values) {
    sorted.assign(values.begin(), values.end());
    std::sort(sorted.begin(), sorted.end());
    long double sum = 0;
    for (const double v : sorted)
      if (v > 0) sum += x_log_x(v);
    return sum;
  };
  const long double cells = sum_x_log_x(table.first(static_cast<std::size_t>(rows) * static_cast<std::size_t>(cols)));
  const auto n = static_cast<long double>(total);
  const long double mi = (cells - sum_x_log_x(row_sum) - sum_x_log_x(col_sum) + n * std::log(n)) / n;
  return std::max(0.0, static_cast<double>(mi));
}

double pearson_chi2(std::span<const double> table, int rows, int cols, int& df) {
  const auto [row_sum, col_sum, total] = margins_of(table, rows, cols);
  int used_rows = 0, used_cols = 0;
  for (double v : row_sum) used_rows += v > 0;
  for (double v : col_sum) used_cols += v > 0;
  df = std::max(0, (used_rows - 1) * (used_cols - 1));
  if (df == 0) return 0;
  // The terms are summed in ascending order, so tables that are row and column permutations of
  // each other (equal in exact arithmetic) get the same bits.
  std::vector<double> terms;
  terms.reserve(static_cast<std::size_t>(rows * cols));
  for (int r = 0; r < rows; ++r) {
    if (row_sum[static_cast<std::size_t>(r)] <= 0) continue;
    for (int c = 0; c < cols; ++c) {
      if (col_sum[static_cast<std::size_t>(c)] <= 0) continue;
      const double expected = row_sum[static_cast<std::size_t>(r)] * col_sum[static_cast<std::size_t>(c)] / total;
      const double d = table[static_cast<std::size_t>(r * cols + c)] - expected;
      terms.push_back(d * d / expected);
    }
  }
  std::sort(terms.begin(), terms.end());
  double chi2 = 0;
  for (const double t : terms) chi2 += t;
  return chi2;
}

double chi2_upper_tail(double statistic, double df) {
  if (!(df > 0) || !(statistic > 0)) return 1.0;
  if (std::isinf(statistic)) return 0.0;
  return boost::math::cdf(boost::math::complement(boost::math::chi_squared_distribution<double, DoublePolicy>(df), statistic));
}

double f_upper_tail(double statistic, double df1, double df2) {
  if (!(df1 > 0) || !(df2 > 0) || !(statistic > 0)) return 1.0;
  if (std::isinf(statistic)) return 0.0;
  return boost::math::cdf(
      boost::math::complement(boost::math::fisher_f_distribution<double, DoublePolicy>(df1, df2), statistic));
}


std::vector<double> bh_adjust(std::span<const double> p) {
  const std::size_t m = p.size();
  std::vector<std::size_t> order(m);
  std::iota(order.begin(), order.end(), std::size_t{0});
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return p[a] < p[b]; });
  std::vector<double> q(m);
  double running = 1.0;
  for (std::size_t r = m; r-- > 0;) {
    const double value = p[order[r]] * static_cast<double>(m) / static_cast<double>(r + 1);
    running = std::min(running, value);
    q[order[r]] = running;
  }
  return q;
}

std::vector<double> bonferroni_adjust(std::span<const double> p) {
  std::vector<double> out(p.size());
  for (std::size_t i = 0; i < p.size(); ++i) out[i] = std::min(1.0, p[i] * static_cast<double>(p.size()));
  return out;
}


FeatureScores score_features(const ConstMatrixRef& m, std::span<const std::int64_t> features,
                             const ClassCodes& classes, const ScoreOptions& options,
                             std::span<const ColumnStats> stats, std::span<const std::int64_t> rows) {
  const int k = static_cast<int>(classes.classes.size());
  if (k < 2)
    throw Error(ErrorKind::kInput,
                "the labels have " + std::to_string(k) + " class" + (k == 1 ? " (" + classes.classes[0] + ")" : "") +
                    "; scoring against a label needs at least two (check the label column)");
  if (options.bins < 2) throw_usage_error("`bins` must be 2 or more");
  if (options.neighbors < 1) throw_usage_error("`neighbors` must be 1 or more");
  if (static_cast<std::int64_t>(classes.codes.size()) != m.rows())
    throw Error(ErrorKind::kOther, "internal: one class code per sample expected");
  if (!stats.empty() && stats.size() != features.size())
    throw Error(ErrorKind::kOther, "internal: one ColumnStats per scored feature expected");

  const std::size_t p = features.size();
  FeatureScores out;
  out.feature.assign(features.begin(), features.end());
  std::vector<internal::ClassResult> results(p);
  // An exception must not leave an OpenMP region (std::terminate): keep the first and rethrow.
  std::exception_ptr failure;
  const int threads = internal::thread_count(options.threads);
  std::vector<internal::ClassScratch> scratch(static_cast<std::size_t>(threads));
  ProgressStep progress("scoring", static_cast<std::int64_t>(p), "features");
  std::vector<int> row_codes;
  for (const std::int64_t i : rows) row_codes.push_back(classes.codes[static_cast<std::size_t>(i)]);
  internal::for_each_column(m, features, threads, [&](std::size_t j) {
    progress.add(1);
    try {
      internal::ClassScratch& s = scratch[static_cast<std::size_t>(omp_get_thread_num())];
      const float* column = m.col(features[j]).data();
      if (!rows.empty()) {
        std::vector<float>& x = s.gathered;
        x.resize(rows.size());
        for (std::size_t i = 0; i < rows.size(); ++i) x[i] = column[rows[i]];
        results[j] = internal::score_class_column(x.data(), static_cast<std::int64_t>(x.size()), row_codes, k, options,
                                                  s, nullptr);
        return;
      }
      results[j] = internal::score_class_column(column, m.rows(), classes.codes, k, options, s,
                                                stats.empty() ? nullptr : &stats[j]);
    } catch (...) {
#pragma omp critical(pare_score_failure)
      if (!failure) failure = std::current_exception();
    }
  });
  if (failure) std::rethrow_exception(failure);
  if (options.counts_chi2)
    for (std::size_t j = 0; j < p; ++j)
      if (results[j].negative)
        throw Error(ErrorKind::kInput,
                    "chi2-counts needs non-negative counts, but feature " + std::to_string(features[j] + 1) +
                        " has negative values (rank by chi2, f or mi instead)");

  auto take = [&](auto member) {
    std::vector<double> v(p);
    for (std::size_t j = 0; j < p; ++j) v[j] = results[j].*member;
    return v;
  };
  out.mi = take(&internal::ClassResult::mi);
  out.chi2 = take(&internal::ClassResult::chi2);
  out.chi2_p = take(&internal::ClassResult::chi2_p);
  out.f = take(&internal::ClassResult::f);
  out.f_p = take(&internal::ClassResult::f_p);
  out.variance = take(&internal::ClassResult::variance);
  out.missing_rate = take(&internal::ClassResult::missing_rate);
  out.chi2_df.resize(p);
  out.flags.resize(p);
  out.defined.resize(p);
  for (std::size_t j = 0; j < p; ++j) {
    out.chi2_df[j] = results[j].chi2_df;
    out.flags[j] = results[j].flags;
    out.defined[j] = results[j].defined;
  }
  out.chi2_q = bh_adjust(out.chi2_p);
  out.chi2_bonferroni = bonferroni_adjust(out.chi2_p);
  out.f_q = bh_adjust(out.f_p);
  out.f_bonferroni = bonferroni_adjust(out.f_p);
  if (options.counts_chi2) {
    out.chi2_counts = take(&internal::ClassResult::counts);
    out.chi2_counts_p = take(&internal::ClassResult::counts_p);
    out.chi2_counts_q = bh_adjust(out.chi2_counts_p);
    out.chi2_counts_bonferroni = bonferroni_adjust(out.chi2_counts_p);
  }
  return out;
}

double criterion_score(const FeatureScores& s, Criterion c, std::size_t i) {
  switch (c) {
    case Criterion::kMi: return s.mi[i];
    case Criterion::kChi2: return s.chi2[i];
    case Criterion::kChi2Counts: return s.chi2_counts.empty() ? 0.0 : s.chi2_counts[i];
    case Criterion::kF: return s.f[i];
    case Criterion::kPearson: return std::abs(s.pearson_r[i]);
    case Criterion::kSpearman: return std::abs(s.spearman_rho[i]);
    case Criterion::kVariance: break;
  }
  return s.variance[i];
}

double criterion_q(const FeatureScores& s, Criterion c, std::size_t i) {
  switch (c) {
    case Criterion::kMi: return s.continuous ? s.spearman_q[i] : s.chi2_q[i];
    case Criterion::kChi2: return s.chi2_q[i];
    case Criterion::kChi2Counts: return s.chi2_counts_q.empty() ? 1.0 : s.chi2_counts_q[i];
    case Criterion::kF: return s.f_q[i];
    case Criterion::kPearson: return s.pearson_q[i];
    case Criterion::kSpearman: return s.spearman_q[i];
    case Criterion::kVariance: break;
  }
  return 1.0;
}

bool criterion_fits(Criterion c, bool continuous) {
  switch (c) {
    case Criterion::kMi:
    case Criterion::kVariance: return true;
    case Criterion::kChi2:
    case Criterion::kChi2Counts:
    case Criterion::kF: return !continuous;
    case Criterion::kPearson:
    case Criterion::kSpearman: break;
  }
  return continuous;
}

void require_criterion_fits(Criterion c, bool continuous) {
  if (criterion_fits(c, continuous)) return;
  if (continuous)
    throw_usage_error(std::string("`rank_by` ") + criterion_name(c) + " scores classes, not a continuous target",
                      "rank a target by spearman, pearson, mi or variance");
  throw_usage_error(std::string("`rank_by` ") + criterion_name(c) + " scores a continuous target, not classes",
                    "rank classes by mi, chi2, chi2-counts, f or variance; a numeric column is a target with `target`");
}

bool criterion_defined(const FeatureScores& s, Criterion c, std::size_t i) {
  if (c == Criterion::kVariance) return true;
  return i < s.defined.size() && (s.defined[i] & defined_bit(c)) != 0;
}

std::vector<std::size_t> rank_order(const FeatureScores& scores, Criterion criterion) {
  std::vector<std::size_t> order(scores.size());
  std::iota(order.begin(), order.end(), std::size_t{0});
  // NaN (the variance of a feature with an infinite value) sorts last: a NaN in the comparison
  // would break the strict weak order the sort needs.
  auto key = [&](std::size_t i) {
    const double v = criterion_score(scores, criterion, i);
    return std::isnan(v) ? -kInf : v;
  };
  std::stable_sort(order.begin(), order.end(),
                   [&](std::size_t a, std::size_t b) { return key(a) > key(b); });
  return order;
}

std::string score_flag_names(std::uint8_t flags) {
  std::string out;
  auto add = [&](std::uint8_t bit, const char* name) {
    if (!(flags & bit)) return;
    if (!out.empty()) out += ',';
    out += name;
  };
  add(kScoreFewValues, "few_values");
  add(kScoreConstant, "constant");
  add(kScoreSeparates, "separates_classes");
  return out;
}

namespace {

// The start of a ranking.tsv line: rank, the feature's name and its --feature-info columns.
void append_row_start(std::string& out, std::size_t rank, std::size_t feature,
                      const std::vector<std::string>& feature_names,
                      const std::vector<std::vector<std::string>>& info) {
  out += std::to_string(rank);
  out += '\t';
  internal::append_field(out, feature_names[feature], '\t');
  for (const auto& column : info) {
    out += '\t';
    internal::append_field(out, column[feature], '\t');
  }
}

// ranking.tsv against a continuous target, after the header's `rank, feature, info...` in `out`.
// The end of a line: with stability selection, its column last.
void end_row(std::string& out, std::span<const double> stability, std::size_t r) {
  if (!stability.empty()) {
    out += '\t';
    internal::append_number(out, stability[r]);
  }
  out += '\n';
}

std::string ranking_tsv_continuous(const FeatureScores& s, std::span<const std::size_t> order,
                                   const std::vector<std::string>& feature_names,
                                   const std::vector<std::vector<std::string>>& info, std::span<const double> stability,
                                   std::string& out) {
  out += "\tpearson_r\tpearson_p\tpearson_q\tspearman_rho\tspearman_p\tspearman_q\tmi\tvariance\tmissing_rate"
         "\tindex\tflags";
  out += stability.empty() ? "\n" : "\tstability\n";
  for (std::size_t r = 0; r < order.size(); ++r) {
    const std::size_t i = order[r];
    append_row_start(out, r + 1, static_cast<std::size_t>(s.feature[i]), feature_names, info);
    for (const double v : {s.pearson_r[i], s.pearson_p[i], s.pearson_q[i], s.spearman_rho[i], s.spearman_p[i],
                           s.spearman_q[i], s.mi[i], s.variance[i], s.missing_rate[i]}) {
      out += '\t';
      internal::append_number(out, v);
    }
    out += '\t' + std::to_string(s.feature[i] + 1) + '\t' + score_flag_names(s.flags[i]);
    end_row(out, stability, r);
  }
  return std::move(out);
}

}  // namespace

std::string ranking_tsv(const FeatureScores& s, std::span<const std::size_t> order,
                        const std::vector<std::string>& feature_names, bool with_counts,
                        const std::vector<std::string>& info_names,
                        const std::vector<std::vector<std::string>>& info, std::span<const double> stability) {
  std::string out = "rank\tfeature";
  for (const auto& name : info_names) {
    out += '\t';
    internal::append_field(out, name, '\t');
  }
  if (s.continuous) return ranking_tsv_continuous(s, order, feature_names, info, stability, out);
  out += "\tmi\tchi2\tchi2_p\tchi2_q\tf\tf_p\tf_q\tvariance\tmissing_rate";
  if (with_counts) out += "\tchi2_counts\tchi2_counts_p\tchi2_counts_q";
  out += "\tchi2_bonferroni\tf_bonferroni";
  if (with_counts) out += "\tchi2_counts_bonferroni";
  out += "\tchi2_df\tindex\tflags";
  out += stability.empty() ? "\n" : "\tstability\n";
  auto num = [&](double v) {
    out += '\t';
    internal::append_number(out, v);
  };
  for (std::size_t r = 0; r < order.size(); ++r) {
    const std::size_t i = order[r];
    append_row_start(out, r + 1, static_cast<std::size_t>(s.feature[i]), feature_names, info);
    num(s.mi[i]);
    num(s.chi2[i]);
    num(s.chi2_p[i]);
    num(s.chi2_q[i]);
    num(s.f[i]);
    num(s.f_p[i]);
    num(s.f_q[i]);
    num(s.variance[i]);
    num(s.missing_rate[i]);
    if (with_counts) {
      num(s.chi2_counts[i]);
      num(s.chi2_counts_p[i]);
      num(s.chi2_counts_q[i]);
    }
    num(s.chi2_bonferroni[i]);
    num(s.f_bonferroni[i]);
    if (with_counts) num(s.chi2_counts_bonferroni[i]);
    out += '\t' + std::to_string(s.chi2_df[i]) + '\t' + std::to_string(s.feature[i] + 1) + '\t' +
           score_flag_names(s.flags[i]);
    end_row(out, stability, r);
  }
  return out;
}

}  // namespace pare
