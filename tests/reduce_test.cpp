// The reduction pipeline (SPEC §4 steps 1-7) on small matrices built here by hand: the decision
// of each step, the fill values, the transform, the text outputs (selection-log.tsv,
// ranking.tsv, the reduced matrix in both layouts).
#include "pare/reduce.h"

#include <algorithm>  // std::sort
#include <cmath>      // std::log2, std::nextafter, std::sqrt, std::isnan
#include <cstdint>    // std::int64_t
#include <cstdio>     // std::snprintf
#include <limits>     // std::numeric_limits
#include <random>     // std::mt19937_64
#include <sstream>    // std::istringstream
#include <string>     // std::string
#include <vector>     // std::vector

#include <boost/math/distributions/fisher_f.hpp>
#include <catch2/catch.hpp>

#include "pare/error.h"
#include "pare/io.h"
#include "pare/matrix.h"

namespace {

using pare::Decision;
using pare::FeatureTable;
using pare::ReduceOptions;
using pare::Reduction;

constexpr float kGap = std::numeric_limits<float>::quiet_NaN();

// prefix + number, appended (GCC 12 warns falsely about `"literal" + std::to_string(...)`).
std::string numbered(const char* prefix, std::int64_t v) {
  std::string s(prefix);
  s += std::to_string(v);
  return s;
}

// A rows=samples table from columns (one vector per feature), names f0, f1, ... unless given.
FeatureTable make_table(const std::vector<std::vector<float>>& columns,
                        std::vector<std::string> labels = {}, std::vector<std::string> names = {}) {
  FeatureTable t;
  const auto n = static_cast<Eigen::Index>(columns.front().size());
  t.values.resize(n, static_cast<Eigen::Index>(columns.size()));
  for (std::size_t j = 0; j < columns.size(); ++j) {
    REQUIRE(static_cast<Eigen::Index>(columns[j].size()) == n);
    for (Eigen::Index i = 0; i < n; ++i)
      t.values(i, static_cast<Eigen::Index>(j)) = columns[j][static_cast<std::size_t>(i)];
    if (names.size() < columns.size()) names.push_back(numbered("f", static_cast<std::int64_t>(j)));
  }
  t.feature_names = names;
  for (Eigen::Index i = 0; i < n; ++i) t.sample_ids.push_back(numbered("s", i + 1));
  t.labels = std::move(labels);
  if (!t.labels.empty()) t.label_name = "group";
  t.id_name = "sample";
  t.source = "train.csv";
  return t;
}

// Options with only the named steps doing anything: no pruning and no variance floor unless set.
ReduceOptions quiet_options() {
  ReduceOptions o;
  o.prune = false;
  o.threads = 1;
  return o;
}

const Decision& decision(const Reduction& r, std::size_t j) {
  return r.decisions.at(j);
}

bool contains(const std::string& text, const std::string& part) {
  return text.find(part) != std::string::npos;
}

std::vector<std::vector<std::string>> tsv_rows(const std::string& text) {
  std::vector<std::vector<std::string>> rows;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) {
    std::vector<std::string> fields;
    std::size_t start = 0;
    for (;;) {
      const auto tab = line.find('\t', start);
      fields.push_back(
          line.substr(start, tab == std::string::npos ? std::string::npos : tab - start));
      if (tab == std::string::npos) break;
      start = tab + 1;
    }
    rows.push_back(fields);
  }
  return rows;
}

// Pearson r in double of two columns without gaps (the textbook formula).
double pearson(const std::vector<float>& a, const std::vector<float>& b) {
  double ma = 0, mb = 0;
  for (std::size_t i = 0; i < a.size(); ++i) {
    ma += a[i];
    mb += b[i];
  }
  ma /= static_cast<double>(a.size());
  mb /= static_cast<double>(b.size());
  double sab = 0, saa = 0, sbb = 0;
  for (std::size_t i = 0; i < a.size(); ++i) {
    sab += (a[i] - ma) * (b[i] - mb);
    saa += (a[i] - ma) * (a[i] - ma);
    sbb += (b[i] - mb) * (b[i] - mb);
  }
  return sab / std::sqrt(saa * sbb);
}

// One-way ANOVA F and its p-value (Boost.Math's F distribution), the textbook definition:
// F = (SSB / (k - 1)) / (SSW / (n - k)).
double anova_p(const std::vector<float>& x, const std::vector<std::string>& labels,
               double* f_out = nullptr) {
  std::vector<std::string> classes = labels;
  std::sort(classes.begin(), classes.end());
  classes.erase(std::unique(classes.begin(), classes.end()), classes.end());
  double grand = 0;
  for (float v : x) grand += v;
  grand /= static_cast<double>(x.size());
  double ssb = 0, ssw = 0;
  for (const auto& c : classes) {
    double sum = 0, count = 0;
    for (std::size_t i = 0; i < x.size(); ++i)
      if (labels[i] == c) {
        sum += x[i];
        ++count;
      }
    const double mean = sum / count;
    ssb += count * (mean - grand) * (mean - grand);
    for (std::size_t i = 0; i < x.size(); ++i)
      if (labels[i] == c) ssw += (x[i] - mean) * (x[i] - mean);
  }
  const double k = static_cast<double>(classes.size()), n = static_cast<double>(x.size());
  const double f = (ssb / (k - 1)) / (ssw / (n - k));
  if (f_out) *f_out = f;
  return boost::math::cdf(boost::math::complement(boost::math::fisher_f(k - 1, n - k), f));
}

// Benjamini & Hochberg (1995) step-up: q_(i) = min over j >= i of m p_(j) / j, capped at 1.
std::vector<double> bh(const std::vector<double>& p) {
  const std::size_t m = p.size();
  std::vector<std::size_t> order(m);
  for (std::size_t i = 0; i < m; ++i) order[i] = i;
  std::stable_sort(order.begin(), order.end(),
                   [&](std::size_t a, std::size_t b) { return p[a] < p[b]; });
  std::vector<double> q(m);
  double running = 1;
  for (std::size_t k = m; k-- > 0;) {
    running = std::min(running, p[order[k]] * static_cast<double>(m) / static_cast<double>(k + 1));
    q[order[k]] = running;
  }
  return q;
}

std::string fixed3(double v) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.3f", v);
  return buffer;
}

void require_input_error(FeatureTable t, const ReduceOptions& o, const std::string& what) {
  try {
    pare::reduce(t, o);
    FAIL("no error");
  } catch (const pare::Error& e) {
    INFO(e.what());
    REQUIRE(e.kind() == pare::ErrorKind::kInput);
    REQUIRE(contains(e.what(), what));
  }
}

}  // namespace

TEST_CASE("reduce: the missing filter keeps a rate equal to --drop-missing-above", "[reduce]") {
  // 10 samples: f0 misses 2 (rate 0.2), f1 misses 3 (0.3), f2 none, f3 all. 2/10 and 3/10 are the
  // doubles nearest 0.2 and 0.3 (correctly rounded division), so the boundary is exact.
  const std::vector<float> full{1, 2, 3, 4, 5, 6, 7, 8, 9, 10};
  auto with_gaps = [&](int gaps) {
    std::vector<float> v{3, 1, 4, 1, 5, 9, 2, 6, 5, 3};
    for (int i = 0; i < gaps; ++i) v[static_cast<std::size_t>(3 * i % 10)] = kGap;
    return v;
  };
  const auto make = [&] { return make_table({with_gaps(2), with_gaps(3), full, with_gaps(10)}); };
  {
    FeatureTable t = make();
    const Reduction r = pare::reduce(t, quiet_options());
    REQUIRE(decision(r, 0).kept);
    REQUIRE(decision(r, 2).kept);
    for (const std::size_t j : {std::size_t{1}, std::size_t{3}}) {
      INFO("f" << j << ": " << decision(r, j).reason);
      REQUIRE_FALSE(decision(r, j).kept);
      REQUIRE(step_name(decision(r, j).step) == std::string("missing"));
    }
    REQUIRE(decision(r, 1).reason == "missing rate 0.3 > 0.2");
    REQUIRE(decision(r, 3).reason == "missing rate 1 > 0.2");
    REQUIRE(r.steps.at(0).step == pare::Step::kMissing);
    REQUIRE(r.steps.at(0).in == 4);
    REQUIRE(r.steps.at(0).out == 2);
  }
  {
    ReduceOptions o = quiet_options();
    o.drop_missing_above = 0.3;
    FeatureTable t = make();
    const Reduction r = pare::reduce(t, o);
    REQUIRE(decision(r, 1).kept);
    REQUIRE(step_name(decision(r, 3).step) == std::string("missing"));
  }
  {
    ReduceOptions o = quiet_options();
    o.drop_missing_above = 0;  // complete features only
    FeatureTable t = make();
    const Reduction r = pare::reduce(t, o);
    REQUIRE(r.kept == std::vector<std::int64_t>{2});
  }
  {
    // Step 1 off: the all-missing feature reaches the variance filter, which has nothing to
    // measure.
    ReduceOptions o = quiet_options();
    o.missing_filter = false;
    FeatureTable t = make();
    const Reduction r = pare::reduce(t, o);
    REQUIRE(decision(r, 1).kept);
    REQUIRE(step_name(decision(r, 3).step) == std::string("variance"));
    REQUIRE(decision(r, 3).reason == "fewer than 2 observed values");
  }
}

TEST_CASE("reduce: fill values by mean, median and zero, in the raw and the log2 scale",
          "[reduce]") {
  // f0 observed {1, 2, 4, 10} (mean 4.25, median 3), f1 observed {1, 2, 9} (mean 4, median 2),
  // f2 observed {0.5, 0.25, 8, 1.25, 3} (mean 2.6, median 1.25); 6 samples.
  const std::vector<float> f0{1, kGap, 2, 4, kGap, 10};
  const std::vector<float> f1{kGap, 9, 2, kGap, 1, kGap};
  const std::vector<float> f2{0.5f, 0.25f, 8, kGap, 1.25f, 3};
  struct Case {
    pare::Impute impute;
    float fill[3];
  };
  const Case cases[] = {{pare::Impute::kMean, {4.25f, 4.0f, static_cast<float>(13.0 / 5)}},
                        {pare::Impute::kMedian, {3.0f, 2.0f, 1.25f}},
                        {pare::Impute::kZero, {0.0f, 0.0f, 0.0f}}};
  for (const Case& c : cases) {
    for (const bool log2 : {false, true}) {
      INFO(pare::impute_name(c.impute) << (log2 ? ", --log2" : ""));
      ReduceOptions o = quiet_options();
      o.drop_missing_above = 0.5;
      o.impute = c.impute;
      o.log2 = log2;
      FeatureTable t = make_table({f0, f1, f2});
      const FeatureTable raw = t;
      const Reduction r = pare::reduce(t, o);
      REQUIRE(r.kept.size() == 3);
      for (std::size_t j = 0; j < 3; ++j) {
        INFO("f" << j);
        // The plan stores the raw-scale fill value.
        REQUIRE(r.fill[j] == c.fill[j]);
        for (Eigen::Index i = 0; i < 6; ++i) {
          const float x = raw.values(i, static_cast<Eigen::Index>(j));
          const float v = std::isnan(x) ? c.fill[j] : x;
          // log2(x + 1) of SPEC §4 step 3, in double, stored as float.
          const float expected =
              log2 ? static_cast<float>(std::log2(static_cast<double>(v) + 1.0)) : v;
          INFO("sample " << i);
          REQUIRE(t.values(i, static_cast<Eigen::Index>(j)) == expected);
        }
      }
    }
  }
}

TEST_CASE("reduce: --log2 refuses negative input, except in features already dropped", "[reduce]") {
  const std::vector<float> good{1, 2, 3, 4, 5};
  const std::vector<float> negative{1, -0.5f, 3, 4, 5};
  ReduceOptions o = quiet_options();
  o.log2 = true;
  require_input_error(make_table({good, negative}, {}, {"g1", "tide"}), o,
                      "feature tide has negative values");
  require_input_error(make_table({good, negative}), o, "`log2`");
  // The negative feature is mostly missing, so step 1 drops it before the transform.
  FeatureTable t = make_table({good, {kGap, -0.5f, kGap, kGap, 5}});
  const Reduction r = pare::reduce(t, o);
  REQUIRE(r.kept == std::vector<std::int64_t>{0});
  REQUIRE(step_name(decision(r, 1).step) == std::string("missing"));
  // Without --log2 negative values are fine.
  FeatureTable plain = make_table({good, negative});
  REQUIRE(pare::reduce(plain, quiet_options()).kept.size() == 2);
}

TEST_CASE("reduce: the variance filter, --min-variance boundary, observed values, log2 scale",
          "[reduce]") {
  // Sample variance (ddof 1) by hand: {0,1,0,1}: mean 0.5, squares sum 1, variance 1/3 exactly the
  // double 1.0/3; {0,1,3,7} under log2(x+1) is {0,1,2,3}: variance 5/3 (raw: 28.75/3);
  // {0,2,gap,0,2} observed {0,2,0,2}: variance 4/3 (mean-filled it would be 1).
  const std::vector<float> third{0, 1, 0, 1, kGap};
  const std::vector<float> grows{0, 1, 3, 7, kGap};
  const std::vector<float> gappy{0, 2, kGap, 0, 2};
  const std::vector<float> flat{5, 5, 5, 5, 5};
  {
    ReduceOptions o = quiet_options();
    o.min_variance = 1.0 / 3.0;  // equal: kept
    FeatureTable t = make_table({third, grows, gappy, flat});
    const Reduction r = pare::reduce(t, o);
    REQUIRE(r.variance[0] == 1.0 / 3.0);
    REQUIRE(std::abs(r.variance[1] - 28.75 / 3) <= 1e-12);  // two-pass in double: 1e-12 is slack
    REQUIRE(r.variance[2] == 4.0 / 3.0);
    REQUIRE(r.variance[3] == 0.0);
    REQUIRE(decision(r, 0).kept);
    REQUIRE(decision(r, 2).kept);
    REQUIRE(step_name(decision(r, 3).step) == std::string("variance"));
    REQUIRE(decision(r, 3).reason == "variance 0 < 0.333");
  }
  {
    ReduceOptions o = quiet_options();
    o.min_variance = std::nextafter(1.0 / 3.0, 1.0);  // just above: dropped
    FeatureTable t = make_table({third, grows, gappy, flat});
    const Reduction r = pare::reduce(t, o);
    REQUIRE_FALSE(decision(r, 0).kept);
    REQUIRE(step_name(decision(r, 0).step) == std::string("variance"));
    REQUIRE(decision(r, 0).reason == "variance 0.333 < 0.333");
    REQUIRE(decision(r, 2).kept);
  }
  {
    // On the log2 scale f1 has variance 5/3 < 2 and is dropped; raw (9.58) it is kept. A fifth
    // feature {0, 15, 0, 15, 3} is {0, 4, 0, 4, 2} on the log2 scale (variance 4): kept either way.
    const std::vector<float> big{0, 15, 0, 15, 3};
    ReduceOptions o = quiet_options();
    o.min_variance = 2;
    o.log2 = true;
    FeatureTable t = make_table({third, grows, gappy, flat, big});
    const Reduction r = pare::reduce(t, o);
    REQUIRE(std::abs(r.variance[1] - 5.0 / 3.0) <= 1e-12);
    REQUIRE(r.variance[4] == 4.0);
    REQUIRE(step_name(decision(r, 1).step) == std::string("variance"));
    REQUIRE(r.kept == std::vector<std::int64_t>{4});
    o.log2 = false;
    FeatureTable raw = make_table({third, grows, gappy, flat, big});
    REQUIRE(pare::reduce(raw, o).kept == std::vector<std::int64_t>{4, 1});  // by variance
  }
  {
    // The default floor 1e-8 drops the constant feature; switched off, it is kept.
    FeatureTable t = make_table({third, flat});
    REQUIRE(pare::reduce(t, quiet_options()).kept == std::vector<std::int64_t>{0});
    ReduceOptions o = quiet_options();
    o.variance_filter = false;
    FeatureTable u = make_table({third, flat});
    REQUIRE(pare::reduce(u, o).kept.size() == 2);
  }
}

TEST_CASE("reduce: --drop-low-variance drops the lowest fraction, ties in input order",
          "[reduce]") {
  // Three orthogonal patterns of variance 1/3, scaled: variances 4/3, 1/3, 1/3, 3, 1/3, 16/3.
  const std::vector<float> a{0, 1, 0, 1}, b{1, 0, 0, 1}, c{0, 0, 1, 1};
  auto times = [](std::vector<float> v, float s) {
    for (auto& x : v) x *= s;
    return v;
  };
  const auto make = [&] { return make_table({times(a, 2), b, c, times(b, 3), a, times(c, 4)}); };
  struct Case {
    double fraction;
    std::vector<std::int64_t> dropped;
  };
  // floor(fraction * 6) features go: 0.1 -> 0; 0.34 -> 2 (two of the three tied at 1/3, the
  // first two in input order); 0.5 -> 3 (all three tied); 0.67 -> 4 (then the 4/3 one).
  const Case cases[] = {{0.1, {}}, {0.34, {1, 2}}, {0.5, {1, 2, 4}}, {0.67, {0, 1, 2, 4}}};
  for (const Case& k : cases) {
    INFO("--drop-low-variance " << k.fraction);
    ReduceOptions o = quiet_options();
    o.drop_low_variance = k.fraction;
    FeatureTable t = make();
    const Reduction r = pare::reduce(t, o);
    std::vector<std::int64_t> dropped;
    for (std::size_t j = 0; j < 6; ++j)
      if (!decision(r, j).kept) {
        dropped.push_back(static_cast<std::int64_t>(j));
        REQUIRE(step_name(decision(r, j).step) == std::string("variance"));
        INFO(decision(r, j).reason);
        REQUIRE(contains(decision(r, j).reason, "in the lowest"));
      }
    REQUIRE(dropped == k.dropped);
  }
  ReduceOptions bad = quiet_options();
  bad.drop_low_variance = 1;
  FeatureTable t = make();
  REQUIRE_THROWS_AS(pare::reduce(t, bad), pare::Error);
}

TEST_CASE("reduce: relevance with --fdr keeps q <= Q of the ranking test", "[reduce]") {
  // 24 samples in two classes; features shift class B by 0 .. 3 standard deviations. F p-values
  // from Boost.Math's F distribution and Benjamini-Hochberg q computed here decide the expected
  // set; each q must sit clear of the threshold.
  std::mt19937_64 rng(8);
  std::normal_distribution<double> normal(0.0, 1.0);
  const std::size_t n = 24;
  std::vector<std::string> labels;
  for (std::size_t i = 0; i < n; ++i) labels.push_back(i % 2 ? "B" : "A");
  const double shifts[] = {0, 3, 0, 0.2, 2, 0, 1.2, 0, 0.1, 0};
  std::vector<std::vector<float>> columns;
  for (const double s : shifts) {
    std::vector<float> v;
    for (std::size_t i = 0; i < n; ++i)
      v.push_back(static_cast<float>(normal(rng) + (i % 2 ? s : 0)));
    columns.push_back(v);
  }
  std::vector<double> p, f(columns.size());
  for (std::size_t j = 0; j < columns.size(); ++j) p.push_back(anova_p(columns[j], labels, &f[j]));
  const std::vector<double> q = bh(p);
  for (const double fdr : {0.05, 0.2}) {
    INFO("--fdr " << fdr);
    ReduceOptions o = quiet_options();
    o.rank_by = pare::Criterion::kF;
    o.fdr = fdr;
    FeatureTable t = make_table(columns, labels);
    const Reduction r = pare::reduce(t, o);
    REQUIRE(r.supervised);
    std::vector<std::int64_t> expected;
    for (std::size_t j = 0; j < columns.size(); ++j) {
      INFO("f" << j << ": F " << f[j] << ", q " << q[j] << "; pare: " << decision(r, j).reason);
      REQUIRE(std::abs(q[j] - fdr) > 0.1 * fdr);
      if (q[j] <= fdr) {
        expected.push_back(static_cast<std::int64_t>(j));
        REQUIRE(decision(r, j).kept);
      } else {
        REQUIRE(step_name(decision(r, j).step) == std::string("relevance"));
        REQUIRE(contains(decision(r, j).reason, "F-test q = "));
        REQUIRE(contains(decision(r, j).reason, "> " + std::string(fdr == 0.05 ? "0.05" : "0.2")));
      }
    }
    // Kept in F order, descending.
    std::sort(expected.begin(), expected.end(), [&](std::int64_t a, std::int64_t b) {
      return f[static_cast<std::size_t>(a)] > f[static_cast<std::size_t>(b)];
    });
    REQUIRE(r.kept == expected);
    REQUIRE(!expected.empty());
    REQUIRE(expected.size() < columns.size());
  }
  // --fdr 1 (the default) filters nothing.
  ReduceOptions o = quiet_options();
  o.rank_by = pare::Criterion::kF;
  FeatureTable t = make_table(columns, labels);
  REQUIRE(pare::reduce(t, o).kept.size() == columns.size());
}

namespace {

// Eight samples, classes A A A A B B B B, and features whose fate is decided by hand:
//   gappy   2 of 8 missing (0.25 > 0.2)                           -> missing
//   flat    constant                                              -> variance
//   strong  0 1 0 1 | 10 11 10 11: the largest F                  -> kept, rank 1
//   twin    strong with one value moved: F a little lower, r 0.99 -> redundancy, names strong
//   medium  class means 1.5 and 3.5 (one gap, mean-filled)       -> kept, rank 2
//   noise1, noise2, noise3: equal class means, F = 0, tied       -> noise1 rank 3 (input order),
//                                                                    the others not reached
const std::vector<std::string> kLabels{"A", "A", "A", "A", "B", "B", "B", "B"};
const std::vector<std::string> kNames{"gappy",  "flat",   "strong", "twin",
                                      "medium", "noise1", "noise2", "noise3"};
const std::vector<std::vector<float>> kColumns{
    {1, kGap, 3, 4, kGap, 6, 7, 8},  {5, 5, 5, 5, 5, 5, 5, 5},    {0, 1, 0, 1, 10, 11, 10, 11},
    {0, 1, 0, 1.5f, 10, 11, 10, 11}, {0, 3, 1, 2, 2, 4, kGap, 5}, {1, 2, 3, 4, 4, 3, 2, 1},
    {2, 1, 2, 1, 1, 2, 1, 2},        {1, 1, 2, 2, 2, 2, 1, 1}};

}  // namespace

TEST_CASE("reduce: every step on one table, and selection-log.tsv and ranking.tsv", "[reduce]") {
  // Preconditions computed here: the F order strong > twin > medium > noise (all 0).
  double f_strong = 0, f_twin = 0, f_medium = 0, f_noise = 0;
  anova_p(kColumns[2], kLabels, &f_strong);
  anova_p(kColumns[3], kLabels, &f_twin);
  anova_p({0, 3, 1, 2, 2, 4, 5}, {"A", "A", "A", "A", "B", "B", "B"}, &f_medium);  // observed cells
  for (std::size_t j = 5; j < 8; ++j) {
    anova_p(kColumns[j], kLabels, &f_noise);
    REQUIRE(f_noise == 0);
  }
  REQUIRE(f_strong > f_twin);
  REQUIRE(f_twin > f_medium);
  REQUIRE(f_medium > 0);
  const double r_twin = pearson(kColumns[2], kColumns[3]);
  REQUIRE(r_twin > 0.9);

  ReduceOptions o;
  o.rank_by = pare::Criterion::kF;
  o.keep = 3;
  o.threads = 2;
  FeatureTable t = make_table(kColumns, kLabels, kNames);
  const Reduction r = pare::reduce(t, o);
  REQUIRE(r.kept == std::vector<std::int64_t>{2, 4, 5});

  struct Expect {
    const char* status;
    const char* step;
    std::string reason;  // exact, or a prefix when it ends in '*'
    const char* rank;
  };
  const Expect expect[] = {
      {"dropped", "missing", "missing rate 0.25 > 0.2", ""},
      {"dropped", "variance", "variance 0 < 1e-08", ""},
      {"kept", "kept", "rank 1 by f (*", "1"},
      {"dropped", "redundancy", "|r| = " + fixed3(r_twin) + " with strong (kept, rank 1)", ""},
      {"kept", "kept", "rank 2 by f (*", "2"},
      {"kept", "kept", "rank 3 by f (0)", "3"},
      {"dropped", "top", "not reached: the first 3 were already kept (--keep 3)*", ""},
      {"dropped", "top", "not reached: the first 3 were already kept (--keep 3)*", ""},
  };
  REQUIRE(decision(r, 3).partner == 2);

  const auto log = tsv_rows(pare::selection_log_tsv(t, r));
  REQUIRE(log.size() == kNames.size() + 1);  // header + one line per input feature
  const std::vector<std::string> head(log[0].begin(), log[0].begin() + 6);
  REQUIRE(head == std::vector<std::string>{"feature", "index", "status", "step", "reason", "rank"});
  const auto column = [&](const std::string& name) {
    const auto it = std::find(log[0].begin(), log[0].end(), name);
    REQUIRE(it != log[0].end());
    return static_cast<std::size_t>(it - log[0].begin());
  };
  for (std::size_t j = 0; j < kNames.size(); ++j) {
    const auto& row = log[j + 1];
    INFO("line of " << kNames[j] << ": reason \"" << row.at(4) << "\"");
    REQUIRE(row.size() == log[0].size());
    REQUIRE(row[0] == kNames[j]);
    REQUIRE(row[1] == std::to_string(j + 1));
    REQUIRE(row[2] == expect[j].status);
    REQUIRE(row[3] == expect[j].step);
    const std::string& want = expect[j].reason;
    if (want.back() == '*')
      REQUIRE(row[4].rfind(want.substr(0, want.size() - 1), 0) == 0);
    else
      REQUIRE(row[4] == want);
    REQUIRE(row[5] == expect[j].rank);
    // Scores exist for the features that reached the relevance step, NA before it.
    const bool scored = j >= 2;
    REQUIRE((row[column("f")] == "NA") == !scored);
    REQUIRE((row[column("variance")] == "NA") == (j == 0));
  }
  // F in the log matches the textbook F computed here (1e-9 relative: the same formula in
  // double, different summation order).
  REQUIRE(std::abs(std::stod(log[3][column("f")]) - f_strong) <= 1e-9 * f_strong);
  REQUIRE(std::abs(std::stod(log[5][column("f")]) - f_medium) <= 1e-9 * f_medium);
  REQUIRE(std::stod(log[1][column("missing_rate")]) == 0.25);

  const auto ranking = tsv_rows(pare::reduction_ranking_tsv(t, r));
  REQUIRE(ranking.size() == 4);
  const auto rank_col =
      std::find(ranking[0].begin(), ranking[0].end(), "feature") - ranking[0].begin();
  const auto index_col =
      std::find(ranking[0].begin(), ranking[0].end(), "index") - ranking[0].begin();
  REQUIRE(static_cast<std::size_t>(index_col) < ranking[0].size());
  const char* names[] = {"strong", "medium", "noise1"};
  const char* index[] = {"3", "5", "6"};
  for (std::size_t k = 0; k < 3; ++k) {
    REQUIRE(ranking[k + 1][0] == std::to_string(k + 1));
    REQUIRE(ranking[k + 1][static_cast<std::size_t>(rank_col)] == names[k]);
    REQUIRE(ranking[k + 1][static_cast<std::size_t>(index_col)] == index[k]);
  }

  // Step counts: read is added by the command; here missing .. top.
  const std::vector<std::pair<std::int64_t, std::int64_t>> counts{{8, 7}, {7, 7}, {7, 7}, {7, 6},
                                                                  {6, 6}, {6, 5}, {5, 3}};
  REQUIRE(r.steps.size() == counts.size());
  for (std::size_t s = 0; s < counts.size(); ++s) {
    INFO(step_name(r.steps[s].step));
    REQUIRE(r.steps[s].in == counts[s].first);
    REQUIRE(r.steps[s].out == counts[s].second);
  }
}

TEST_CASE("reduce: top K without pruning names the rank", "[reduce]") {
  ReduceOptions o;
  o.rank_by = pare::Criterion::kF;
  o.keep = 2;
  o.prune = false;
  FeatureTable t = make_table(kColumns, kLabels, kNames);
  const Reduction r = pare::reduce(t, o);
  // Without pruning the twin is second.
  REQUIRE(r.kept == std::vector<std::int64_t>{2, 3});
  REQUIRE(step_name(decision(r, 4).step) == std::string("top"));
  INFO(decision(r, 4).reason);
  REQUIRE(contains(decision(r, 4).reason, "rank 3"));
  REQUIRE(contains(decision(r, 4).reason, "--keep 2"));
  REQUIRE(step_name(decision(r, 7).step) == std::string("top"));
  REQUIRE(contains(decision(r, 7).reason, "rank 6"));
}

TEST_CASE("reduce: without labels features are ranked by variance", "[reduce]") {
  // Variances (ddof 1): f0 1/3, f1 3 (=9 x 1/3), f2 4/3, f3 3 (tie with f1), f4 0 (dropped).
  const std::vector<std::vector<float>> columns{
      {0, 1, 0, 1}, {0, 3, 0, 3}, {2, 0, 0, 2}, {0, 0, 3, 3}, {1, 1, 1, 1}};
  ReduceOptions o;
  o.threads = 1;
  o.prune = false;  // four non-constant features in 4 samples are necessarily correlated
  FeatureTable t = make_table(columns);
  const Reduction r = pare::reduce(t, o);
  REQUIRE_FALSE(r.supervised);
  REQUIRE(r.criterion == pare::Criterion::kVariance);
  // Descending variance, ties in input order (f1 before f3).
  REQUIRE(r.kept == std::vector<std::int64_t>{1, 3, 2, 0});
  REQUIRE(decision(r, 1).reason == "rank 1 by variance (3)");
  REQUIRE(step_name(decision(r, 4).step) == std::string("variance"));
  const auto ranking = tsv_rows(pare::reduction_ranking_tsv(t, r));
  REQUIRE(ranking[0] ==
          std::vector<std::string>{"rank", "feature", "variance", "missing_rate", "index"});
  REQUIRE(ranking.size() == 5);
  REQUIRE(ranking[1] == std::vector<std::string>{"1", "f1", "3", "0", "2"});
  REQUIRE(ranking[2][1] == "f3");
  REQUIRE(ranking[4][1] == "f0");
  // No score columns in the log of an unsupervised run.
  const auto log = tsv_rows(pare::selection_log_tsv(t, r));
  REQUIRE(log[0] == std::vector<std::string>{"feature", "index", "status", "step", "reason", "rank",
                                             "variance", "missing_rate"});

  // Labels given but the relevance step off: no scores, and the input order is kept.
  ReduceOptions off = o;
  off.relevance = false;
  FeatureTable u = make_table(columns, {"x", "y", "x", "y"});
  const Reduction ru = pare::reduce(u, off);
  REQUIRE_FALSE(ru.supervised);
  REQUIRE(ru.kept == std::vector<std::int64_t>{0, 1, 2, 3});
}

TEST_CASE("reduce: every feature filtered out is an input error", "[reduce]") {
  ReduceOptions o = quiet_options();
  o.min_variance = 1e6;
  require_input_error(make_table({{1, 2, 3}, {4, 5, 7}}), o, "every feature was filtered out");
  ReduceOptions m = quiet_options();
  m.drop_missing_above = 0.1;
  require_input_error(make_table({{1, kGap, 3}, {kGap, 5, 7}}), m,
                      "every feature was filtered out");
}

TEST_CASE("reduce: the reduced matrix text in both layouts", "[reduce]") {
  // Values chosen to print exactly: the shortest float text (0.1f prints as 0.1), NA for a gap.
  FeatureTable t = make_table({{1.5f, 0.1f, -2}, {7, kGap, 1e-5f}, {3, 4, 5}}, {"A", "B", "A"},
                              {"g,1", "g2", "g3"});
  const std::vector<std::int64_t> cols{2, 0};
  const std::vector<std::string> names{"g3", "g,1"};
  const std::string rows_samples = pare::reduced_matrix_text(t, cols, names);
  // Ids and numbers only, in both layouts (the labels go to samples.tsv).
  REQUIRE(rows_samples ==
          "sample,g3,\"g,1\"\n"
          "s1,3,1.5\n"
          "s2,4,0.1\n"
          "s3,5,-2\n");
  t.layout = pare::Layout::kRowsAreFeatures;
  t.delimiter = '\t';
  t.id_name = "feature";
  const std::string rows_features = pare::reduced_matrix_text(t, {0, 1}, {"g,1", "g2"});
  REQUIRE(rows_features ==
          "feature\ts1\ts2\ts3\n"
          "g,1\t1.5\t0.1\t-2\n"
          "g2\t7\tNA\t1e-05\n");
}
