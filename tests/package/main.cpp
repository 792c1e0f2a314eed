// Uses the installed library through its public headers only: reads the wine data Debian's
// python3-sklearn ships (178 samples, 13 measurements, 3 cultivars; CHECKS.md §10), runs a
// reduction with pare::reduce and checks the result against outside values. Exit 0 when the
// checks pass, 1 when one fails, 77 (skipped) when the data file is missing outside CI.
#include <cmath>     // std::abs
#include <cstdlib>   // std::getenv
#include <fstream>   // std::ifstream
#include <iostream>  // std::cout, std::cerr
#include <sstream>   // std::istringstream
#include <string>    // std::string, std::getline
#include <vector>    // std::vector

#include <pare/pipeline.h>
#include <pare/plan.h>
#include <pare/reduce.h>

int main() {
  const std::string path = "/usr/lib/python3/dist-packages/sklearn/datasets/data/wine_data.csv";
  std::ifstream in(path);
  if (!in) {
    const char* ci = std::getenv("CI");
    std::cout << "SKIP: " << path << " not found (install python3-sklearn)\n";
    return ci != nullptr && std::string(ci) == "true" ? 1 : 77;
  }
  std::string line;
  std::getline(in, line);  // "178,13,class_0,class_1,class_2"
  std::vector<std::vector<float>> rows;
  std::vector<std::string> classes;
  while (std::getline(in, line)) {
    std::istringstream fields(line);
    std::vector<float> values;
    std::string field;
    while (std::getline(fields, field, ',')) values.push_back(std::stof(field));
    classes.push_back("cultivar " + std::to_string(static_cast<int>(values.back())));
    values.pop_back();
    rows.push_back(values);
  }
  pare::FeatureTable table;
  const auto n = static_cast<Eigen::Index>(rows.size()), p = static_cast<Eigen::Index>(rows.front().size());
  table.values.resize(n, p);
  for (Eigen::Index i = 0; i < n; ++i)
    for (Eigen::Index j = 0; j < p; ++j) table.values(i, j) = rows[static_cast<std::size_t>(i)][static_cast<std::size_t>(j)];
  for (Eigen::Index j = 0; j < p; ++j) table.feature_names.push_back("m" + std::to_string(j + 1));
  for (Eigen::Index i = 0; i < n; ++i) table.sample_ids.push_back("w" + std::to_string(i + 1));
  table.labels = classes;
  table.label_name = "cultivar";
  table.source = path;

  pare::ReduceOptions options;
  options.rank_by = pare::Criterion::kF;
  options.keep = 3;
  const pare::FeatureTable copy = table;  // reduce() changes the values it keeps
  const pare::Reduction r = pare::reduce(table, options);

  int failed = 0;
  auto check = [&](bool ok, const std::string& what) {
    std::cout << (ok ? "PASS " : "FAIL ") << what << "\n";
    failed += ok ? 0 : 1;
  };
  check(r.kept.size() == 3, "three features kept");
  // One-way ANOVA F of flavanoids (column 7) and proline (column 13) across the cultivars:
  // scipy.stats.f_oneway on the same file gives 233.92587268154935 and 207.92037390217774
  // (recomputed with Debian's scipy 1.10.1). pare reads float32 values: agreement to 1e-5.
  for (const auto& [column, want] : {std::pair{6, 233.92587268154935}, std::pair{12, 207.92037390217774}}) {
    const std::int64_t at = r.score_of[static_cast<std::size_t>(column)];
    const double got = at >= 0 ? r.scores.f[static_cast<std::size_t>(at)] : -1;
    check(std::abs(got - want) <= 1e-5 * want,
          "F of column " + std::to_string(column + 1) + " = " + std::to_string(got) + " (scipy " + std::to_string(want) + ")");
  }
  // The largest F ranks first (scipy: flavanoids, column 7).
  check(!r.kept.empty() && r.kept.front() == 6, "flavanoids ranks first by F");
  check(!pare::selection_log_tsv(table, r).empty(), "the selection log is written");
  // The same selection as one run with a projection (pipeline.h), its plan written (plan.h).
  pare::FeatureTable run_table = copy;
  pare::PipelineOptions run_options;
  run_options.reduce = options;
  run_options.projection.components = 2;
  const pare::PipelineResult result = pare::run_pipeline(run_table, run_options);
  check(result.reduction.kept == r.kept, "run_pipeline keeps the same features as reduce");
  check(result.projection && result.projection->scores.cols() == 2, "run_pipeline projects on 2 components");
  check(pare::plan_json(run_table, result, pare::RunRecord{}).find("\"pare_plan\"") != std::string::npos,
        "plan.json is written from the result");
  std::cout << (failed ? "package consumer: FAILED\n" : "package consumer: passed\n");
  return failed ? 1 : 0;
}
