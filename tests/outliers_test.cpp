// The sample screen (pare/outliers.h): robust distances against hand-computed values, the
// chi-square threshold against its closed form and published table values, planted outliers found
// in synthetic data and none flagged in clean data of the same shape, and the command line:
// samples.tsv, the printed summary and --drop-outliers.
#include "pare/outliers.h"

#include <algorithm>   // std::find, std::sort
#include <cmath>       // std::log, std::sqrt, std::exp2, std::log2, std::acos
#include <cstdint>     // std::int64_t
#include <filesystem>  // std::filesystem::exists
#include <limits>      // std::numeric_limits
#include <random>      // std::mt19937_64
#include <sstream>     // std::istringstream
#include <string>      // std::string
#include <vector>      // std::vector

#include <catch2/catch.hpp>

#include "support/cli_run.h"
#include "support/temp_dir.h"
#include <nlohmann/json.hpp>

namespace {

// prefix + number, appended (GCC 12 warns falsely about `"literal" + std::to_string(...)`).
std::string numbered(const char* prefix, std::int64_t v) {
  std::string s(prefix);
  s += std::to_string(v);
  return s;
}

using pare::test::TempDir;

constexpr float kGap = std::numeric_limits<float>::quiet_NaN();

// Synthetic data of one shape: two classes (every third sample is "dry"; 20 features shifted 1.5
// sd in it), two latent factors on 60 features each, unit normal noise, 2% gaps. With `plant`,
// four samples are made outliers in four different ways:
//   7  extreme on the first factor (7 sd),
//   50 extreme on the second factor (-7 sd),
//   91 every feature shifted by 1.5 sd (a sample-wide offset),
//   113 half the features shifted by 2.5 sd (a partial artefact).
struct Synthetic {
  pare::Matrix x;
  std::vector<std::string> ids, labels;
};

constexpr std::int64_t kPlanted[] = {7, 50, 91, 113};

Synthetic synthetic(std::uint64_t seed, bool plant, Eigen::Index n = 120, Eigen::Index p = 400) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  Synthetic s;
  s.x.resize(n, p);
  std::vector<int> half(static_cast<std::size_t>(p), 0);
  for (Eigen::Index j = 0; j < p; ++j) half[static_cast<std::size_t>(j)] = uniform(rng) < 0.5;
  for (Eigen::Index i = 0; i < n; ++i) {
    const bool dry = i % 3 == 0;
    s.ids.push_back(numbered("S", 1000 + i));
    s.labels.push_back(dry ? "dry" : "wet");
    double f1 = normal(rng), f2 = normal(rng);
    if (plant && i == 7) f1 = 7;
    if (plant && i == 50) f2 = -7;
    for (Eigen::Index j = 0; j < p; ++j) {
      double v = normal(rng);
      if (j < 20 && dry) v += 1.5;
      if (j >= 20 && j < 80) v += 0.8 * f1;
      if (j >= 80 && j < 140) v += 0.8 * f2;
      if (plant && i == 91) v += 1.5;
      if (plant && i == 113 && half[static_cast<std::size_t>(j)]) v += 2.5;
      s.x(i, j) = uniform(rng) < 0.02 ? kGap : static_cast<float>(v);
    }
  }
  return s;
}

std::vector<std::int64_t> planted() {
  return {std::begin(kPlanted), std::end(kPlanted)};
}

}  // namespace

TEST_CASE("robust distances: median, robust sd and the distance, by hand", "[outliers]") {
  // One component, scores 1..9 and 100: median 5.5; absolute deviations, sorted: 0.5, 0.5, 1.5,
  // 1.5, 2.5, 2.5, 3.5, 3.5, 4.5, 94.5. MAD 2.5, so 1.4826 MAD = 3.7065; the 80th percentile
  // (linear between order statistics: h = 9 x 0.8 = 7.2) is 3.5 + 0.2 x 1 = 3.7, / 1.2816 = 2.887.
  // The larger, 1.4826 MAD, is the spread.
  Eigen::MatrixXd s(10, 1);
  s << 1, 2, 3, 4, 5, 6, 7, 8, 9, 100;
  const pare::RobustDistances r = pare::robust_distances(s, 0.05);
  REQUIRE(r.center == std::vector<double>{5.5});
  // 1 / Phi^-1(0.75) = 1.482602218505602 (common practice; Phi^-1(0.75) = 0.6744897501960817).
  REQUIRE(r.spread[0] == Approx(2.5 * 1.482602218505602).epsilon(1e-15));
  REQUIRE(r.distance[9] == Approx(94.5 / (2.5 * 1.482602218505602)).epsilon(1e-14));
  REQUIRE(r.distance[0] == Approx(4.5 / (2.5 * 1.482602218505602)).epsilon(1e-14));
  // Threshold: chi-square(1) upper 0.05/10 = 0.005 quantile is z(0.0025)^2, z(0.0025) = 2.807 (the
  // standard normal table's two-sided 0.5% point, recalled).
  REQUIRE(r.threshold == Approx(2.807).margin(5e-4));
  REQUIRE(r.flagged == std::vector<char>{0, 0, 0, 0, 0, 0, 0, 0, 0, 1});

  // Even count: the median is the mean of the middle two. Two components add in quadrature.
  Eigen::MatrixXd t(4, 2);
  t << 1, 10, 2, 20, 3, 30, 4, 40;
  const pare::RobustDistances q = pare::robust_distances(t, 0.05);
  REQUIRE(q.center == std::vector<double>{2.5, 25});
  // |dev| 0.5, 0.5, 1.5, 1.5: MAD 1 -> 1.4826; 80th percentile (h = 2.4) 1.5 -> 1.1704. The
  // second component is the first times 10.
  REQUIRE(q.spread[0] == Approx(1.482602218505602));
  REQUIRE(q.spread[1] == Approx(14.82602218505602));
  REQUIRE(q.distance[0] == Approx(std::sqrt(2.0) * 1.5 / 1.482602218505602).epsilon(1e-14));
}

TEST_CASE("robust distances: a group of more than a fifth of the samples is not outlying",
          "[outliers]") {
  // 30 scores near 0 (-0.4..0.4) and 20 near 10: the median is 0.4 and the MAD 0.8, so by the MAD
  // alone all 20 would lie 8 robust sd out. Sorted absolute deviations: 30 of 0..0.8, then 9.2,
  // 9.4, 9.6, 9.8, 10 four times each; the 80th percentile (h = 49 x 0.8 = 39.2) is 9.6, and
  // 9.6 / 1.2816 = 7.49 is the spread (Phi^-1(0.9) = 1.2815515655446004, standard normal table).
  Eigen::MatrixXd s(50, 1);
  for (int i = 0; i < 50; ++i) s(i, 0) = (i < 30 ? 0.0 : 10.0) + 0.2 * ((i % 5) - 2);
  const pare::RobustDistances r = pare::robust_distances(s);
  REQUIRE(r.center[0] == Approx(0.4));
  REQUIRE(r.spread[0] == Approx(9.6 / 1.2815515655446004).epsilon(1e-12));
  for (std::size_t i = 0; i < 50; ++i) REQUIRE(r.flagged[i] == 0);
}

TEST_CASE("robust distances: when most scores are equal, the mean absolute deviation",
          "[outliers]") {
  // Nine of ten scores equal: the MAD and the 80th percentile of the deviations are 0. The mean
  // absolute deviation from the median (0) is 5 / 10, times sqrt(pi / 2) (closed form:
  // E|X - mu| = sd sqrt(2 / pi) for normal X).
  Eigen::MatrixXd s(10, 1);
  s << 0, 0, 0, 0, 0, 0, 0, 0, 0, 5;
  const pare::RobustDistances r = pare::robust_distances(s);
  REQUIRE(r.spread[0] == Approx(0.5 * std::sqrt(std::acos(-1.0) / 2)).epsilon(1e-14));
  REQUIRE(r.distance[9] == Approx(5 / r.spread[0]).epsilon(1e-14));
  // Every score equal: that component adds nothing, and nobody is flagged.
  Eigen::MatrixXd flat = Eigen::MatrixXd::Constant(12, 2, 3.0);
  const pare::RobustDistances f = pare::robust_distances(flat);
  for (std::size_t i = 0; i < 12; ++i) {
    REQUIRE(f.distance[i] == 0);
    REQUIRE(f.flagged[i] == 0);
  }
  REQUIRE_THROWS(pare::robust_distances(Eigen::MatrixXd(0, 1)));
  REQUIRE_THROWS(pare::robust_distances(s, 0.0));
}

TEST_CASE("robust distances: with classes, each sample is measured from its class's median",
          "[outliers]") {
  // One component: 40 samples of class 0 at -2..2, 5 of class 1 at 18..22 and one more (45) at
  // 35: a small class that separates. Class 2 has 2 samples (fewer than 5), at 0.5 and 1.5: they
  // are measured from the overall median.
  Eigen::MatrixXd s(48, 1);
  std::vector<int> cls(48, 0);
  for (int i = 0; i < 40; ++i) s(i, 0) = (i % 5) - 2.0;
  for (int i = 40; i < 45; ++i) {
    s(i, 0) = 20 + (i % 5) - 2.0;
    cls[static_cast<std::size_t>(i)] = 1;
  }
  s(45, 0) = 35;
  cls[45] = 1;
  s(46, 0) = 0.5;
  s(47, 0) = 1.5;
  cls[46] = cls[47] = 2;
  // Pooled: median 0.25, absolute deviations 0.25 x 9, 0.75 x 8, 1.25 x 9, 1.75 x 8, 2.25 x 8,
  // then class 1 at 17.75 and more: MAD 1.25 (1.853), 80th percentile (h = 37.6) 2.25 (1.756).
  // Class 1 is all more than 9 robust sd out.
  const pare::RobustDistances pooled = pare::robust_distances(s, 0.05);
  REQUIRE(pooled.spread[0] == Approx(1.25 * 1.482602218505602));
  for (std::size_t i = 0; i < 48; ++i) REQUIRE(pooled.flagged[i] == (i >= 40 && i <= 45));
  // By class: medians 0, 20.5 and (class 2, too small) the overall 0.25. Absolute differences,
  // sorted: 0 x 8, 0.25, 0.5 x 2, 1 x 16, 1.25, 1.5 x 2, 2 x 16, 2.5, 14.5: MAD 1 (1.4826),
  // 80th percentile (h = 37.6) 2 -> 2 / 1.2816 = 1.5606, the spread. Only sample 45 stands out.
  const pare::RobustDistances by_class = pare::robust_distances(s, 0.05, cls);
  const double spread = 2 / 1.2815515655446004;
  REQUIRE(by_class.spread[0] == Approx(spread).epsilon(1e-14));
  REQUIRE(by_class.distance[45] == Approx(14.5 / spread).epsilon(1e-14));
  REQUIRE(by_class.distance[46] == Approx(0.25 / spread).epsilon(1e-14));
  REQUIRE(by_class.distance[47] == Approx(1.25 / spread).epsilon(1e-14));
  for (std::size_t i = 0; i < 48; ++i) REQUIRE(by_class.flagged[i] == (i == 45));
  REQUIRE_THROWS(pare::robust_distances(s, 0.05, std::vector<int>(3, 0)));
}

TEST_CASE("chi-square upper quantiles: closed form for 2 df, table values for 3 df", "[outliers]") {
  // With 2 df the upper tail is exp(-x / 2), so the quantile is -2 ln(tail) (closed form).
  for (double tail : {0.05, 0.05 / 240, 1e-6}) {
    INFO("tail " << tail);
    REQUIRE(pare::chi2_upper_quantile(tail, 2) == Approx(-2 * std::log(tail)).epsilon(1e-12));
  }
  // Published chi-square tables (recalled): 3 df, upper 0.025 -> 9.348, upper 0.001 -> 16.266.
  // Tolerance: the tables' three decimals.
  REQUIRE(pare::chi2_upper_quantile(0.025, 3) == Approx(9.348).margin(5e-4));
  REQUIRE(pare::chi2_upper_quantile(0.001, 3) == Approx(16.266).margin(5e-4));
}

TEST_CASE("screen: planted outliers are flagged, the clean twin has none", "[outliers]") {
  const Synthetic dirty = synthetic(11, true);
  pare::ScreenOptions o;
  o.threads = 1;
  const pare::SampleScreen s = pare::screen_samples(dirty.x, o);
  REQUIRE(s.done);
  REQUIRE(s.scores.cols() == 3);
  REQUIRE(s.features.size() == 400);
  INFO("threshold " << s.robust.threshold);
  for (const std::int64_t i : kPlanted)
    INFO("planted " << i << " distance " << s.robust.distance[static_cast<std::size_t>(i)]);
  REQUIRE(s.flagged() == planted());

  // The same generator and seed without the plants: nobody is flagged.
  const Synthetic clean = synthetic(11, false);
  const pare::SampleScreen c = pare::screen_samples(clean.x, o);
  REQUIRE(c.done);
  REQUIRE(c.flagged().empty());

  // Results do not depend on the thread count.
  o.threads = 2;
  const pare::SampleScreen two = pare::screen_samples(dirty.x, o);
  REQUIRE(two.robust.distance == s.robust.distance);
  REQUIRE(two.missing == s.missing);
}

TEST_CASE("screen: clean data of that shape is rarely flagged at all", "[outliers]") {
  // The Bonferroni split makes the chance that a clean data set has any flagged sample about
  // alpha = 5%; estimating the median and MAD from the same 120 samples raises it somewhat (the
  // same rule re-implemented with numpy flagged something in 19 of 200 such data sets). Over 40
  // seeds, expect about 2 to 4; more than 8 would mean the threshold is far too loose.
  int with_flags = 0;
  pare::ScreenOptions o;
  for (std::uint64_t seed = 100; seed < 140; ++seed)
    with_flags += !pare::screen_samples(synthetic(seed, false).x, o).flagged().empty();
  INFO(with_flags << " of 40 clean data sets had a flagged sample");
  REQUIRE(with_flags <= 8);
}

TEST_CASE("screen: which features are analysed", "[outliers]") {
  // 30 samples; feature 0 is constant, feature 1 is 40% missing, the others have variance j.
  const Eigen::Index n = 30, p = 12;
  pare::Matrix x(n, p);
  std::mt19937_64 rng(5);
  std::normal_distribution<double> normal(0.0, 1.0);
  for (Eigen::Index j = 0; j < p; ++j)
    for (Eigen::Index i = 0; i < n; ++i)
      x(i, j) = static_cast<float>(std::sqrt(static_cast<double>(j)) * normal(rng));
  x.col(0).setConstant(2.0f);
  for (Eigen::Index i = 0; i < 12; ++i) x(i, 1) = kGap;
  pare::ScreenOptions o;
  o.max_features = 4;
  const pare::SampleScreen s = pare::screen_samples(x, o);
  REQUIRE(s.done);
  REQUIRE(s.n_eligible == 10);  // not the constant one, not the 40%-missing one
  REQUIRE(s.missing[0] == 1);
  REQUIRE(s.missing[20] == 0);
  // The four most variable, ascending: with variance ~ j, almost surely 8..11; check against the
  // sample variances rather than hoping.
  std::vector<std::pair<double, std::int64_t>> by_variance;
  for (Eigen::Index j = 2; j < p; ++j) {
    const Eigen::VectorXd c = x.col(j).cast<double>();
    by_variance.emplace_back(-(c.array() - c.mean()).square().sum() / (n - 1), j);
  }
  std::sort(by_variance.begin(), by_variance.end());
  std::vector<std::int64_t> expected;
  for (std::size_t k = 0; k < 4; ++k) expected.push_back(by_variance[k].second);
  std::sort(expected.begin(), expected.end());
  REQUIRE(s.features == expected);

  // Too few samples: not screened, and the reason says so.
  const pare::SampleScreen few = pare::screen_samples(x.topRows(5), o);
  REQUIRE_FALSE(few.done);
  REQUIRE(few.reason == "too few samples (5; the screen needs 10)");
  REQUIRE(few.missing.size() == 5);
  const std::string tsv = pare::samples_tsv(few, {"a", "b", "c", "d", "e"}, {}, "", {});
  REQUIRE(tsv ==
          "sample\tmissing\tmissing_rate\tdistance\toutlier\tdropped\n"
          "a\t1\t0.08333333333333333\tNA\tno\tno\n"
          "b\t1\t0.08333333333333333\tNA\tno\tno\n"
          "c\t1\t0.08333333333333333\tNA\tno\tno\n"
          "d\t1\t0.08333333333333333\tNA\tno\tno\n"
          "e\t1\t0.08333333333333333\tNA\tno\tno\n");
}

TEST_CASE("screen: log2 analyses log2(x + 1), as if the data had been transformed", "[outliers]") {
  const Synthetic d = synthetic(3, true, 60, 80);
  pare::Matrix raw(d.x.rows(), d.x.cols()), logged(d.x.rows(), d.x.cols());
  for (Eigen::Index j = 0; j < raw.cols(); ++j)
    for (Eigen::Index i = 0; i < raw.rows(); ++i) {
      const float v = d.x(i, j);
      raw(i, j) =
          std::isnan(v) ? v : static_cast<float>(std::exp2(static_cast<double>(v) + 12) - 1);
      logged(i, j) =
          std::isnan(v) ? v : static_cast<float>(std::log2(static_cast<double>(raw(i, j)) + 1));
    }
  pare::ScreenOptions o;
  o.log2 = true;
  const pare::SampleScreen a = pare::screen_samples(raw, o);
  o.log2 = false;
  const pare::SampleScreen b = pare::screen_samples(logged, o);
  REQUIRE(a.done);
  REQUIRE(a.features == b.features);
  REQUIRE(a.robust.distance == b.robust.distance);
  // A negative value makes log2 undefined: that feature is left out.
  raw(0, 5) = -3;
  o.log2 = true;
  REQUIRE(pare::screen_samples(raw, o).n_eligible == a.n_eligible - 1);
}

namespace {

// The synthetic data as a rows=samples CSV with a label column `group`.
std::string csv_of(const Synthetic& s) {
  std::ostringstream out;
  out << "sample";
  for (Eigen::Index j = 0; j < s.x.cols(); ++j) out << ",f" << j;
  out << ",group\n";
  for (Eigen::Index i = 0; i < s.x.rows(); ++i) {
    out << s.ids[static_cast<std::size_t>(i)];
    for (Eigen::Index j = 0; j < s.x.cols(); ++j) {
      out << ',';
      if (!std::isnan(s.x(i, j))) out << s.x(i, j);
    }
    out << ',' << s.labels[static_cast<std::size_t>(i)] << '\n';
  }
  return out.str();
}

std::vector<std::vector<std::string>> tsv_rows(const std::string& text) {
  std::vector<std::vector<std::string>> rows;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) {
    std::vector<std::string> fields;
    std::string field;
    std::istringstream cells(line);
    while (std::getline(cells, field, '\t')) fields.push_back(field);
    rows.push_back(fields);
  }
  return rows;
}

// Sample ids of reduced.csv (rows=samples: the first field of every line after the header).
std::vector<std::string> reduced_ids(const std::string& text) {
  std::vector<std::string> ids;
  std::istringstream in(text);
  std::string line;
  std::getline(in, line);
  while (std::getline(in, line)) ids.push_back(line.substr(0, line.find(',')));
  return ids;
}

}  // namespace

TEST_CASE("cli: samples.tsv flags outliers; --drop-outliers removes them before the reduction",
          "[outliers]") {
  TempDir dir;
  const Synthetic s = synthetic(11, true);
  const std::string data = dir.write("d.csv", csv_of(s));
  std::vector<std::string> names;
  for (const std::int64_t i : kPlanted) names.push_back(s.ids[static_cast<std::size_t>(i)]);

  // Flagged, never removed without --drop-outliers.
  const pare::test::Run keep = pare::test::run(
      {"reduce", data, "--label", "group", "--keep", "20", "--out", dir.file("keep")});
  INFO(keep.err << keep.out);
  REQUIRE(keep.code == 0);
  REQUIRE(keep.out.find("  samples: 4 of 120 samples flagged as outliers") != std::string::npos);
  REQUIRE(keep.out.find(": " + names[0] + ", " + names[1] + ", " + names[2] + ", " + names[3] +
                        "; kept (--drop-outliers removes them)\n") != std::string::npos);
  REQUIRE(reduced_ids(TempDir::read(dir.file("keep/reduced.csv"))) == s.ids);
  const auto rows = tsv_rows(TempDir::read(dir.file("keep/samples.tsv")));
  REQUIRE(rows.size() == 121);
  REQUIRE(rows[0] == std::vector<std::string>{"sample", "group", "missing", "missing_rate",
                                              "screen_pc1", "screen_pc2", "screen_pc3", "distance",
                                              "outlier", "dropped"});
  for (std::size_t i = 0; i < 120; ++i) {
    const bool is_planted = std::find(std::begin(kPlanted), std::end(kPlanted),
                                      static_cast<std::int64_t>(i)) != std::end(kPlanted);
    REQUIRE(rows[i + 1][0] == s.ids[i]);
    REQUIRE(rows[i + 1][1] == s.labels[i]);
    std::int64_t gaps = 0;
    for (Eigen::Index j = 0; j < s.x.cols(); ++j)
      gaps += std::isnan(s.x(static_cast<Eigen::Index>(i), j));
    REQUIRE(rows[i + 1][2] == std::to_string(gaps));
    REQUIRE(rows[i + 1][8] == (is_planted ? "yes" : "no"));
    REQUIRE(rows[i + 1][9] == "no");
  }
  const auto plan = nlohmann::json::parse(TempDir::read(dir.file("keep/plan.json")));
  REQUIRE(plan["sample_screen"]["flagged"].get<std::vector<std::string>>() == names);
  REQUIRE(plan["sample_screen"]["dropped"].empty());
  REQUIRE(std::filesystem::exists(dir.file("keep/report.html")));

  // --drop-outliers: the flagged samples are gone from every output and the summary names them.
  const pare::test::Run drop =
      pare::test::run({"reduce", data, "--label", "group", "--keep", "20", "--components", "2",
                       "--drop-outliers", "--out", dir.file("drop")});
  INFO(drop.err << drop.out);
  REQUIRE(drop.code == 0);
  REQUIRE(drop.out.find(" and dropped before the reduction: " + names[0] + ", " + names[1] + ", " +
                        names[2] + ", " + names[3] + "\n") != std::string::npos);
  std::vector<std::string> remaining;
  for (std::size_t i = 0; i < s.ids.size(); ++i)
    if (std::find(names.begin(), names.end(), s.ids[i]) == names.end())
      remaining.push_back(s.ids[i]);
  REQUIRE(reduced_ids(TempDir::read(dir.file("drop/reduced.csv"))) == remaining);
  const auto dropped_rows = tsv_rows(TempDir::read(dir.file("drop/samples.tsv")));
  REQUIRE(dropped_rows.size() == 121);  // every input sample, the dropped ones marked
  for (std::size_t i = 0; i < 120; ++i) REQUIRE(dropped_rows[i + 1][9] == rows[i + 1][8]);
  const auto drop_plan = nlohmann::json::parse(TempDir::read(dir.file("drop/plan.json")));
  REQUIRE(drop_plan["sample_screen"]["dropped"].get<std::vector<std::string>>() == names);
  REQUIRE(drop_plan["input"]["samples"] == 116);
  // scores.csv has the remaining samples only.
  REQUIRE(reduced_ids(TempDir::read(dir.file("drop/scores.csv"))) == remaining);
}

TEST_CASE("cli: scan writes samples.tsv and report.html and names the flagged samples",
          "[outliers]") {
  TempDir dir;
  const Synthetic s = synthetic(11, true);
  const std::string data = dir.write("d.csv", csv_of(s));
  const pare::test::Run r =
      pare::test::run({"scan", data, "--label", "group", "--out", dir.path()});
  INFO(r.err << r.out);
  REQUIRE(r.code == 0);
  REQUIRE(r.out.find("  outliers   4 of 120 samples flagged as outliers (robust distance > ") !=
          std::string::npos);
  REQUIRE(r.out.find("  report     " + dir.file("report.html") +
                     " (per-sample flags in samples.tsv)\n") != std::string::npos);
  const auto rows = tsv_rows(TempDir::read(dir.file("samples.tsv")));
  REQUIRE(rows.size() == 121);
  std::vector<std::int64_t> flagged;
  for (std::size_t i = 1; i < rows.size(); ++i)
    if (rows[i][8] == "yes") flagged.push_back(static_cast<std::int64_t>(i - 1));
  REQUIRE(flagged == planted());
  const std::string html = TempDir::read(dir.file("report.html"));
  REQUIRE(html.rfind("<!DOCTYPE html>", 0) == 0);
  for (const std::int64_t i : kPlanted)
    REQUIRE(html.find(s.ids[static_cast<std::size_t>(i)]) != std::string::npos);
}
