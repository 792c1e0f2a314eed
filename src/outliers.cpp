#include "pare/outliers.h"

#include <algorithm>  // std::nth_element, std::max_element, std::stable_sort, std::sort, std::min
#include <cmath>      // std::sqrt, std::abs, std::isnan, std::isfinite
#include <cstdio>     // std::snprintf
#include <limits>     // std::numeric_limits
#include <numeric>    // std::iota
#include <span>       // std::span

#include <boost/math/distributions/chi_squared.hpp>

#include "pare/error.h"
#include "pare/projection.h"
#include "pare/reduce.h"
#include "pare/stats.h"

#include "internal/format.h"
#include "internal/omp.h"
#include "internal/columns.h"

namespace pare {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// 1 / Phi^-1(3/4): with it the median absolute deviation estimates the standard deviation of
// normal data (common practice; the constant is the reciprocal of the standard normal's upper
// quartile, 0.67449).
constexpr double kMadToSd = 1.482602218505602;
// sqrt(pi / 2): E|X - mu| = sd * sqrt(2 / pi) for normal X, so this makes the mean absolute
// deviation an estimate of the sd too (closed form).
constexpr double kMeanAbsToSd = 1.2533141373155003;
// Phi^-1(0.9): the 80th percentile of |X - mu| for normal X is 1.2816 sd (standard normal table).
constexpr double kQ80ToSd = 1.2815515655446004;

// The p-quantile of `sorted` by linear interpolation between order statistics (the rule
// numpy.quantile uses by default, so a reference can reproduce it).
double quantile(const std::vector<double>& sorted, double p) {
  const double h = static_cast<double>(sorted.size() - 1) * p;
  const auto lo = static_cast<std::size_t>(h);
  if (lo + 1 >= sorted.size()) return sorted.back();
  return sorted[lo] + (h - static_cast<double>(lo)) * (sorted[lo + 1] - sorted[lo]);
}

double median(std::vector<double> v) {
  const std::size_t mid = v.size() / 2;
  std::nth_element(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(mid), v.end());
  const double upper = v[mid];
  if (v.size() % 2 == 1) return upper;
  const double lower = *std::max_element(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(mid));
  return (lower + upper) / 2;
}

}  // namespace

double chi2_upper_quantile(double tail, double df) {
  if (!(tail > 0 && tail < 1) || !(df > 0))
    throw_usage_error("chi-square quantile needs 0 < tail < 1 and df > 0");
  return boost::math::quantile(
      boost::math::complement(boost::math::chi_squared_distribution<double>(df), tail));
}

// The rule. Each component's scores are standardised robustly, z = (s - median) / (1.4826 MAD),
// and combined as d = sqrt(sum z^2). For normal scores d^2 follows the chi-square distribution
// with K degrees of freedom. Comparing a robust distance with a chi-square quantile is the rule of
// Rousseeuw & Van Zomeren (1990, JASA 85:633-639), who cut at the 0.975 quantile; Hubert,
// Rousseeuw & Vanden Branden (2005, Technometrics 47:64-79) cut the score distance of a robust PCA
// on k components the same way (both recalled, not looked up). A fixed 0.975 flags 2.5% of clean
// samples by design, one in forty; we test every sample, so the tail is split over the n samples
// (Bonferroni, common practice): clean data of any size then has a flagged sample with chance
// about alpha.
//
// With class labels each sample is measured from its own class's median. Classes are expected to
// separate on the first components (that is often why they lead); measured from the overall
// median, the members of a well-separated minority class would all look far out. The spread is
// still pooled over every sample, so each class is judged on the same scale.
RobustDistances robust_distances(const Eigen::MatrixXd& scores, double alpha,
                                 std::span<const int> classes) {
  const Eigen::Index n = scores.rows(), k = scores.cols();
  if (n < 1 || k < 1)
    throw_usage_error("robust distances need at least one sample and one component");
  if (!(alpha > 0 && alpha < 1)) throw_usage_error("the outlier alpha must be between 0 and 1");
  if (!classes.empty() && static_cast<Eigen::Index>(classes.size()) != n)
    throw_usage_error("robust distances need one class per sample");
  int n_classes = 0;
  for (const int c : classes) n_classes = std::max(n_classes, c + 1);
  std::vector<std::int64_t> class_size(static_cast<std::size_t>(n_classes), 0);
  for (const int c : classes) class_size[static_cast<std::size_t>(c)]++;
  RobustDistances r;
  r.alpha = alpha;
  r.distance.assign(static_cast<std::size_t>(n), 0.0);
  std::vector<double> column(static_cast<std::size_t>(n)), deviation(static_cast<std::size_t>(n));
  std::vector<double> member;
  for (Eigen::Index c = 0; c < k; ++c) {
    for (Eigen::Index i = 0; i < n; ++i) column[static_cast<std::size_t>(i)] = scores(i, c);
    const double overall = median(column);
    std::vector<double> class_center(static_cast<std::size_t>(n_classes), overall);
    for (int g = 0; g < n_classes; ++g) {
      if (class_size[static_cast<std::size_t>(g)] < kMinClassForCenter) continue;
      member.clear();
      for (std::size_t i = 0; i < column.size(); ++i)
        if (classes[i] == g) member.push_back(column[i]);
      class_center[static_cast<std::size_t>(g)] = median(member);
    }
    double mean_abs = 0;
    for (std::size_t i = 0; i < column.size(); ++i) {
      column[i] -= classes.empty() ? overall : class_center[static_cast<std::size_t>(classes[i])];
      deviation[i] = std::abs(column[i]);
      mean_abs += deviation[i];
    }
    mean_abs /= static_cast<double>(n);
    // The MAD tolerates up to half the samples far out, which is too many here: with a second
    // group of samples (a batch, an unlabelled class) a little smaller than half, it measures the
    // larger group alone and calls the whole smaller one outlying. The 80th percentile of the
    // absolute deviations tolerates a fifth of the samples far out and spans such a group; on
    // normal scores both estimate the sd, and the larger is taken.
    std::vector<double> sorted = deviation;
    std::sort(sorted.begin(), sorted.end());
    double spread = std::max(kMadToSd * quantile(sorted, 0.5), quantile(sorted, 0.8) / kQ80ToSd);
    // Most scores equal: both are 0 and say nothing about the others. The mean absolute deviation
    // still measures their spread (less robustly).
    if (!(spread > 0)) spread = kMeanAbsToSd * mean_abs;
    r.center.push_back(overall);
    r.spread.push_back(spread);
    // Every score equal: the component separates nobody and adds nothing.
    if (!(spread > 0)) continue;
    for (std::size_t i = 0; i < column.size(); ++i) {
      const double z = column[i] / spread;
      r.distance[i] += z * z;
    }
  }
  r.threshold =
      std::sqrt(chi2_upper_quantile(alpha / static_cast<double>(n), static_cast<double>(k)));
  r.flagged.resize(static_cast<std::size_t>(n));
  for (std::size_t i = 0; i < r.distance.size(); ++i) {
    r.distance[i] = std::sqrt(r.distance[i]);
    r.flagged[i] = r.distance[i] > r.threshold;
  }
  return r;
}

double SampleScreen::missing_rate(std::size_t i) const {
  return n_features > 0 ? static_cast<double>(missing[i]) / static_cast<double>(n_features) : 0.0;
}

std::vector<std::int64_t> SampleScreen::flagged() const {
  std::vector<std::int64_t> out;
  for (std::size_t i = 0; i < robust.flagged.size(); ++i)
    if (robust.flagged[i]) out.push_back(static_cast<std::int64_t>(i));
  return out;
}

SampleScreen screen_samples(const ConstMatrixRef& m, const ScreenOptions& o,
                            std::span<const int> classes) {
  const Eigen::Index n = m.rows(), p = m.cols();
  const int threads = internal::thread_count(o.threads);
  if (o.components < 1) throw_usage_error("the sample screen needs at least one component");
  SampleScreen s;
  s.options = o;
  s.n_features = p;
  s.missing = missing_per_row(m, o.threads);
  if (n < o.min_samples) {
    s.reason = "too few samples (" + std::to_string(n) + "; the screen needs " +
               std::to_string(o.min_samples) + ")";
    return s;
  }

  // Which features qualify, and their variance (on the log2 scale with --log2, where the
  // variance a reduction sees is).
  std::vector<std::int64_t> all(static_cast<std::size_t>(p));
  std::iota(all.begin(), all.end(), std::int64_t{0});
  std::vector<double> variance(static_cast<std::size_t>(p), kNaN),
      mean(static_cast<std::size_t>(p), kNaN);
  const double max_missing = o.max_missing;
  internal::for_each_column(m, all, threads, [&](std::size_t j) {
    const float* x = m.col(static_cast<Eigen::Index>(j)).data();
    ColumnStats st;
    if (o.log2) {
      thread_local std::vector<float> scratch;
      scratch.resize(static_cast<std::size_t>(n));
      for (Eigen::Index i = 0; i < n; ++i) {
        // log2(x + 1) is undefined below -1 and negative below 0: reduce --log2 refuses such a
        // feature, so the screen leaves it out.
        if (x[i] < 0) return;
        scratch[static_cast<std::size_t>(i)] =
            std::isnan(x[i]) ? x[i] : transform_value(x[i], true);
      }
      st = column_stats(std::span<const float>(scratch));
    } else {
      st = column_stats(std::span<const float>(x, static_cast<std::size_t>(n)));
    }
    if (st.n < 2 || st.missing_rate() > max_missing || !(st.variance > 0) ||
        !std::isfinite(st.variance))
      return;
    variance[j] = st.variance;
    mean[j] = st.mean;
  });
  std::vector<std::int64_t> eligible;
  for (std::int64_t j = 0; j < p; ++j)
    if (!std::isnan(variance[static_cast<std::size_t>(j)])) eligible.push_back(j);
  s.n_eligible = static_cast<std::int64_t>(eligible.size());
  std::stable_sort(eligible.begin(), eligible.end(), [&](std::int64_t a, std::int64_t b) {
    return variance[static_cast<std::size_t>(a)] > variance[static_cast<std::size_t>(b)];
  });
  if (o.max_features > 0 && static_cast<std::int64_t>(eligible.size()) > o.max_features)
    eligible.resize(static_cast<std::size_t>(o.max_features));
  std::sort(eligible.begin(), eligible.end());
  const auto used = static_cast<Eigen::Index>(eligible.size());
  const Eigen::Index k =
      std::min<Eigen::Index>({static_cast<Eigen::Index>(o.components), n - 1, used});
  if (k < 1) {
    s.reason = "no feature with at most " +
               std::to_string(static_cast<int>(o.max_missing * 100 + 0.5)) +
               "% missing and a positive variance";
    return s;
  }
  s.features = eligible;

  // The analysed copy: only the chosen columns, mean-filled, on the analysed scale.
  Matrix x(n, used);
  internal::for_each_column(m, eligible, threads, [&](std::size_t a) {
    const auto j = static_cast<std::size_t>(eligible[a]);
    const float* src = m.col(eligible[a]).data();
    float* dst = x.col(static_cast<Eigen::Index>(a)).data();
    const std::span<float> column(dst, static_cast<std::size_t>(n));
    std::copy_n(src, n, dst);
    transform_column(column, o.log2);
    fill_column(column, static_cast<float>(mean[j]), false);  // the mean is on the analysed scale
  });
  ProjectionOptions po;
  po.components = k;
  // Float32 products and a residual of 3e-5: the scores only have to place samples well enough
  // to flag far ones, and this halves the screen's cost (performance.md).
  po.float_products = true;
  // 30 extra Ritz vectors rather than 10: while n <= 32 (K + 30) (1,056 samples at K = 3) the
  // iteration then multiplies by the n x n Gram matrix, formed once, in narrow blocks, where two
  // products with the data per block took 23 blocks for three components at 1,000 x 5,000
  // (0.17-0.19 s against 0.10-0.12 s with the Gram matrix on the make-bench file); more Ritz
  // vectors only sharpen the K kept.
  po.oversample = 30;
  po.center = true;
  // Standardised (correlation PCA): a feature on a large scale must not decide alone who is far
  // out.
  po.scale = true;
  po.seed = o.seed;
  po.threads = o.threads;
  const Projection pr = truncated_pca(x, po);
  if (!pr.converged) {
    s.features.clear();
    s.reason = "the screening PCA did not converge (" + pr.status + ")";
    return s;
  }
  s.scores = pr.scores;
  s.ratio = pr.ratio;
  s.robust = robust_distances(s.scores, o.alpha, classes);
  s.by_class = !classes.empty();
  s.done = true;
  return s;
}

std::string samples_tsv(const SampleScreen& s, const std::vector<std::string>& ids,
                        const std::vector<std::string>& labels, const std::string& label_name,
                        const std::vector<char>& dropped, const std::vector<std::string>& info_names,
                        const std::vector<std::vector<std::string>>& info) {
  const Eigen::Index k = s.done ? s.scores.cols() : 0;
  std::string out = "sample";
  if (!labels.empty()) {
    out += '\t';
    internal::append_field(out, label_name.empty() ? "label" : label_name, '\t');
  }
  for (const auto& name : info_names) {
    out += '\t';
    internal::append_field(out, name, '\t');
  }
  out += "\tmissing\tmissing_rate";
  for (Eigen::Index c = 0; c < k; ++c) out += "\tscreen_pc" + std::to_string(c + 1);
  out += "\tdistance\toutlier\tdropped\n";
  for (std::size_t i = 0; i < ids.size(); ++i) {
    internal::append_field(out, ids[i], '\t');
    if (!labels.empty()) {
      out += '\t';
      // A sample without a label (left out of the supervised steps) is written NA.
      internal::append_field(out, labels[i].empty() ? std::string("NA") : labels[i], '\t');
    }
    for (const auto& column : info) {
      out += '\t';
      internal::append_field(out, column[i], '\t');
    }
    out += '\t' + std::to_string(s.missing[i]) + '\t';
    internal::append_number(out, s.missing_rate(i));
    for (Eigen::Index c = 0; c < k; ++c) {
      out += '\t';
      internal::append_number(out, s.scores(static_cast<Eigen::Index>(i), c));
    }
    out += '\t';
    internal::append_number(out, s.done ? s.robust.distance[i] : kNaN);
    out += s.done && s.robust.flagged[i] ? "\tyes" : "\tno";
    out += !dropped.empty() && dropped[i] ? "\tyes\n" : "\tno\n";
  }
  return out;
}

std::string screen_rule(const SampleScreen& s) {
  if (!s.done) return "not screened: " + s.reason;
  char buffer[200];
  std::snprintf(buffer, sizeof buffer,
                "distance > %.3g, the square root of the chi-square(%lld) upper %.3g/%lld quantile",
                s.robust.threshold, static_cast<long long>(s.scores.cols()), s.robust.alpha,
                static_cast<long long>(s.scores.rows()));
  return std::string(buffer) + (s.by_class ? "; each sample measured from its class's median" : "");
}

}  // namespace pare
