#include "cli/commands.h"

#include <algorithm>  // std::max_element, std::min_element
#include <chrono>     // std::chrono::steady_clock
#include <cmath>      // std::isinf, std::abs
#include <cstdio>     // std::snprintf
#include <filesystem>  // std::filesystem::path, std::filesystem::exists
#include <future>     // std::async
#include <new>        // std::bad_alloc

#include "cli/options.h"
#include "cli/pipeline.h"
#include "cli/text.h"
#include "internal/sha256.h"
#include "pare/demo.h"
#include "pare/error.h"
#include "pare/io.h"
#include "pare/outliers.h"
#include "pare/profile.h"
#include "pare/ranking.h"
#include "pare/report.h"

namespace pare::cli {

namespace {

constexpr const char* kUsage =
    "pare " PARE_VERSION " - shrink wide numeric matrices to informative, non-redundant features\n"
    "\n"
    "usage: pare COMMAND [options]\n"
    "\n"
    "commands:\n"
    "  scan DATA         profile a matrix: missingness, variance, flagged features, class balance\n"
    "  rank DATA         score every feature against the class label and rank them\n"
    "  reduce DATA       run the whole reduction; write the reduced matrix, a log and a plan\n"
    "  project DATA      truncated PCA / SVD of every feature\n"
    "  apply PLAN DATA   replay a saved reduction (and projection) on new samples\n"
    "  demo              write an invented drought-trial data set, then scan and reduce it\n"
    "\n"
    "'pare COMMAND --help' lists a command's options; 'pare --version' prints the version.\n";






void print_scan_summary(std::ostream& out, const FeatureTable& t, const Profile& p, double seconds) {
  const auto n = t.n_samples(), m = t.n_features();
  const double cells = static_cast<double>(n) * static_cast<double>(m);
  out << "pare scan: " << t.source << "\n";
  out << "  shape      " << thousands(n) << " samples x " << thousands(m) << " features ("
      << layout_name(t.layout) << ", " << delimiter_name(t.delimiter) << "-delimited, read in "
      << fixed(seconds, 2) << " s)\n";
  out << "  missing    " << percent(cells > 0 ? static_cast<double>(p.missing_cells) / cells : 0)
      << " of cells (" << thousands(p.missing_cells) << ")";
  out << "; " << thousands(static_cast<std::int64_t>(p.samples_over.size()))
      << " samples above " << percent(p.options.sample_missing) << " missing";
  for (std::size_t k = 0; k < p.samples_over.size() && k < 5; ++k)
    out << (k == 0 ? ": " : ", ") << t.sample_ids[static_cast<std::size_t>(p.samples_over[k])];
  if (p.samples_over.size() > 5) out << ", ...";
  out << "\n";
  out << "  features   " << thousands(p.n_constant) << " constant, " << thousands(p.n_near_constant)
      << " near-constant, " << thousands(p.n_mostly_missing) << " mostly missing (> "
      << percent(p.options.mostly_missing) << "), " << thousands(p.n_all_missing)
      << " all missing, " << thousands(p.n_duplicate_name) << " with a duplicate name\n";
  if (!p.classes.classes.empty()) {
    // A sample without a label has the label "" (left out of supervised steps; counted apart).
    std::int64_t unlabelled = 0, lo = 0, hi = 0, named = 0;
    out << "  classes    " << (t.label_name.empty() ? "label" : t.label_name) << ":";
    for (std::size_t k = 0; k < p.classes.classes.size(); ++k) {
      const std::int64_t count = p.classes.counts[k];
      if (p.classes.classes[k].empty()) {
        unlabelled = count;
        continue;
      }
      out << (named++ == 0 ? " " : ", ") << p.classes.classes[k] << " " << thousands(count);
      lo = lo == 0 ? count : std::min(lo, count);
      hi = std::max(hi, count);
    }
    if (lo > 0)
      out << " (majority:minority " << fixed(static_cast<double>(hi) / static_cast<double>(lo), 1) << ":1)";
    if (unlabelled > 0) out << "; " << thousands(unlabelled) << " without a label";
    if (named < 2) out << " - fewer than two classes: supervised steps need two";
    out << "\n";
  } else {
    out << "  classes    no labels given (--label COLUMN or --labels SHEET.csv)\n";
  }
}



// Profiles `input` and screens its samples (on log2(x + 1) with `log2`); writes profile.tsv,
// samples.tsv and report.html to common.out.
int scan_and_report(const InputOptions& input, const CommonOptions& common, bool log2,
                    const std::vector<std::string>& command_line, std::ostream& out) {
  // Hash the input (for the report's run record) while it is parsed.
  auto data_hash = std::async(std::launch::async, [&] { return internal::sha256_file(input.data); });
  const auto start = std::chrono::steady_clock::now();
  const LoadedData loaded = load_data(input, common, false);
  const FeatureTable& table = loaded.table;
  const double read_seconds = seconds_since(start);
  ProfileOptions options;
  options.threads = common.threads;
  auto lap = std::chrono::steady_clock::now();
  const Profile profile = profile_table(table, options);
  const double profile_seconds = seconds_since(lap);
  // --log2 on negative values is an error here as in rank, reduce and project (the screen would
  // otherwise leave such features out without a word).
  if (log2)
    for (std::size_t j = 0; j < profile.features.size(); ++j)
      if (profile.features[j].n > 0 && profile.features[j].min < 0)
        throw Error(ErrorKind::kInput, table.source + ": feature " + table.feature_names[j] + " has negative values (min " +
                                           short_number(profile.features[j].min) +
                                           "), so --log2 cannot apply (leave out --log2, or transform it yourself)");
  lap = std::chrono::steady_clock::now();
  ScreenOptions screen_options;
  screen_options.log2 = log2;
  screen_options.seed = common.seed;
  screen_options.threads = common.threads;
  const SampleScreen screen = screen_samples(table.values, screen_options, encode_classes(table.labels).codes);
  const double screen_seconds = seconds_since(lap);

  ReportData report;
  report.command = "scan";
  report.title = "pare scan: " + std::filesystem::path(input.data).filename().string();
  report.samples = table.n_samples();
  report.features = table.n_features();
  report.glance.push_back(thousands(table.n_features()) + " features: " + thousands(profile.n_constant) + " constant, " +
                          thousands(profile.n_near_constant) + " near-constant, " +
                          thousands(profile.n_mostly_missing) + " mostly missing (> " +
                          percent(profile.options.mostly_missing) + "), " + thousands(profile.n_all_missing) +
                          " all missing; scan removes nothing.");
  add_profile(report, table, profile);
  add_screen(report, screen, table.sample_ids, table.labels, table.label_name, {});
  if (!loaded.marks.empty()) {
    report.sample_info.mark_name = input.mark_by;
    report.sample_info.marks = loaded.marks;
  }
  ReportRecord& record = report.record;
  record.version = PARE_VERSION;
  record.command_line = command_line;
  record.inputs.push_back({"data", input.data, data_hash.get()});
  if (!input.labels.empty()) {
    const std::string sheet = sheet_path_of(input.labels);
    record.inputs.push_back({"sample sheet (" + table.label_name + ")", sheet, internal::sha256_file(sheet)});
  }
  if (!input.samples.empty()) record.inputs.push_back({"sample list", input.samples, loaded.sample_list_sha256});
  const ReadOptions read = read_options_from(input, common);
  std::string na;
  for (std::size_t i = 0; i < read.na_tokens.size(); ++i) na += (i ? "," : "") + read.na_tokens[i];
  record.parameters = {{"seed", std::to_string(common.seed)},
                       {"read.layout", layout_name(table.layout)},
                       {"read.delimiter", delimiter_name(table.delimiter)},
                       {"read.label", input.label},
                       {"read.na", na},
                       {"read.allow_inf", read.allow_inf ? "true" : "false"},
                       {"mostly_missing", short_number(profile.options.mostly_missing)},
                       {"sample_missing", short_number(profile.options.sample_missing)},
                       {"near_constant_cv", short_number(profile.options.near_constant_cv)},
                       {"screen.log2", log2 ? "true" : "false"}};
  record.timings = {{"read", read_seconds}, {"profile", profile_seconds}, {"sample screen", screen_seconds}};
  record.outputs = {"profile.tsv", "samples.tsv", "report.html"};

  ensure_directory(common.out);
  const std::string path = join_path(common.out, "profile.tsv");
  // All three renamed into place together, only once each is complete.
  OutputFile profile_file(path), samples_file(join_path(common.out, "samples.tsv")),
      report_file(join_path(common.out, "report.html"));
  profile_file.write(profile_tsv(table, profile));
  samples_file.write(
      samples_tsv(screen, table.sample_ids, table.labels, table.label_name, {}, table.sample_info_names, table.sample_info));
  report_file.write(report_html(report));
  profile_file.commit();
  samples_file.commit();
  report_file.commit();
  if (!common.quiet) {
    print_scan_summary(out, table, profile, read_seconds);
    print_sample_screen(out, screen, table.sample_ids, {}, "  outliers   ");
    out << "  wrote      " << path << "\n";
    out << "  report     " << join_path(common.out, "report.html") << " (per-sample flags in samples.tsv)\n";
  }
  return 0;
}

int command_scan(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  InputOptions input;
  bool log2 = false;
  po::options_description desc(
      "pare scan DATA [options]\n\n"
      "Profiles a matrix and writes profile.tsv (one line per feature: n, missing, missing_rate,\n"
      "mean, variance, sd, min, max, flags), samples.tsv (per sample: missing rate, outlier distance\n"
      "and flag) and report.html (plots; open it in a browser).\n\nscan",
      100, 50);
  desc.add_options()("log2", po::bool_switch(&log2), "screen samples for outliers on log2(x + 1), as reduce --log2 does");
  add_input_options(desc, input);
  add_sample_options(desc, input, false);
  add_common_options(desc, common, ".");
  if (!parse_command_line(args, desc, {{"data", &input.data}}, out)) return 0;
  check_input_options(input, common);
  std::vector<std::string> command_line{"pare", "scan"};
  command_line.insert(command_line.end(), args.begin(), args.end());
  return scan_and_report(input, common, log2, command_line, out);
}

int command_demo(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  po::options_description desc(
      "pare demo [options]\n\n"
      "Writes an invented greenhouse drought trial (240 seedlings, 20,000 leaf transcripts, two\n"
      "batches; the planted role of every transcript in greenhouse-truth.tsv), then runs pare on it\n"
      "as a user would: scan, then reduce (--log2 --max-corr 0.9 --keep 200 --components 3\n"
      "--mark-by batch) into DIR/reduce, and reports how much of the planted structure was\n"
      "recovered. Open DIR/reduce/report.html afterwards.\n\noptions",
      100, 50);
  add_common_options(desc, common, "pare-demo", false);
  if (!parse_command_line(args, desc, {}, out)) return 0;
  const DemoFiles files = write_demo(common.out, common.seed);
  if (!common.quiet)
    out << "pare demo: wrote the greenhouse drought trial (seed " << common.seed << ")\n"
        << "  data       " << files.data << "\n"
        << "  samples    " << files.samples << "\n"
        << "  truth      " << files.truth << "\n\n";
  InputOptions input;
  input.data = files.data;
  input.layout = "rows=features";
  input.labels = files.samples + ":condition";
  input.mark_by = "batch";
  // The demo reduces on the log2 scale, so its scan screens samples on that scale too.
  scan_and_report(input, common, true,
                  {"pare", "scan", files.data, "--layout", "rows=features", "--labels", input.labels, "--log2",
                   "--mark-by", "batch", "--out", common.out},
                  out);
  return demo_reduce(files.data, files.samples, files.truth, common, out);
}



int command_rank(const std::vector<std::string>& args, std::ostream& out) {
  CommonOptions common;
  InputOptions input;
  std::string rank_by = "mi", estimator = "binned";
  double fdr = 1.0;
  std::int64_t keep = 0;
  bool log2 = false;
  ScoreOptions score;
  po::options_description desc(
      "pare rank DATA (--label COLUMN | --labels SHEET[:COLUMN]) [options]\n\n"
      "Scores every feature against the class label (binned mutual information, chi-square test,\n"
      "one-way ANOVA F, Benjamini-Hochberg q-values) and writes ranking.tsv, best first, and\n"
      "report.html (plots; open it in a browser).\n\nscoring and ranking",
      100, 50);
  desc.add_options()
      ("log2", po::bool_switch(&log2), "score log2(x + 1) of the values, as reduce --log2 does")
      ("rank-by", po::value(&rank_by)->default_value("mi")->value_name("CRITERION"),
       "mi, chi2, chi2-counts, f or variance")
      ("fdr", po::value(&fdr)->value_name("Q"), "keep features whose q-value for the ranking test is at most Q")
      ("keep", po::value(&keep)->default_value(0)->value_name("K"), "keep the first K features (0 = all)")
      ("bins", po::value(&score.bins)->default_value(10)->value_name("B"), "equal-frequency bins for mi and chi2")
      ("mi-estimator", po::value(&estimator)->default_value("binned")->value_name("E"), "binned or knn")
      ("neighbors", po::value(&score.neighbors)->default_value(3)->value_name("k"), "k of the knn estimator");
  add_input_options(desc, input);
  add_sample_options(desc, input, true);
  add_common_options(desc, common, ".");
  if (!parse_command_line(args, desc, {{"data", &input.data}}, out)) return 0;
  // Every option is checked before the data is read (a large file takes minutes).
  const Criterion criterion = parse_criterion(rank_by);
  if (estimator == "knn") score.mi = MiEstimator::kKnn;
  else if (estimator != "binned") throw_usage_error("--mi-estimator " + estimator + " is not binned or knn");
  if (!(fdr > 0 && fdr <= 1)) throw_usage_error("--fdr must be in (0, 1]");
  if (fdr < 1 && criterion == Criterion::kVariance)
    throw_usage_error("--fdr needs a criterion with a test, and variance has none",
                      "rank by mi, chi2, chi2-counts or f, or leave out --fdr");
  if (keep < 0) throw_usage_error("--keep must be 0 (all) or more");
  if (score.bins < 2) throw_usage_error("--bins must be 2 or more");
  if (score.neighbors < 1) throw_usage_error("--neighbors must be 1 or more");
  if (input.label.empty() && input.labels.empty())
    throw_usage_error("rank needs class labels", "give --label COLUMN or --labels SHEET.csv[:COLUMN]");
  check_input_options(input, common);
  score.counts_chi2 = criterion == Criterion::kChi2Counts;
  score.threads = common.threads;

  auto data_hash = std::async(std::launch::async, [&] { return internal::sha256_file(input.data); });
  const auto start = std::chrono::steady_clock::now();
  LoadedData loaded = load_data(input, common, true);
  FeatureTable& table = loaded.table;
  require_two_classes(table, input);
  if (log2) log2_transform(table, common.threads);
  const double read_seconds = seconds_since(start);
  const auto start_scoring = std::chrono::steady_clock::now();
  const ClassCodes classes = encode_classes(table.labels);
  std::vector<std::int64_t> all(static_cast<std::size_t>(table.n_features()));
  for (std::size_t j = 0; j < all.size(); ++j) all[j] = static_cast<std::int64_t>(j);
  const FeatureScores scores = score_features(table.values, all, classes, score);
  require_some_scored(scores, criterion, table.source);
  const std::vector<std::size_t> ranked = rank_order(scores, criterion);
  std::vector<std::size_t> order;
  std::int64_t passing = 0;  // features with q <= fdr
  for (std::size_t i : ranked) {
    if (criterion != Criterion::kVariance && criterion_q(scores, criterion, i) > fdr) continue;
    ++passing;
    if (keep > 0 && static_cast<std::int64_t>(order.size()) >= keep) continue;
    order.push_back(i);
  }
  const double scoring_seconds = seconds_since(start_scoring);
  if (order.empty())
    throw Error(ErrorKind::kInput, table.source + ": every feature was filtered out: no q-value is at most " +
                                       short_number(fdr) + " (raise --fdr)");
  const std::string transform = log2 ? "log2(x + 1)" : "none";

  ReportData report;
  report.command = "rank";
  report.title = "pare rank: " + std::filesystem::path(input.data).filename().string();
  report.samples = table.n_samples();
  report.features = table.n_features();
  report.glance.push_back("Scored " + thousands(table.n_features()) + " features against " + table.label_name +
                          " (" + std::to_string(classes.classes.size()) + " classes, " + thousands(table.n_samples()) +
                          " samples) on " + (log2 ? "log2(x + 1) of the values" : "the values as read") +
                          "; ranked by " + criterion_name(criterion) + ".");
  add_ranking(report, table, scores, ranked, order, criterion, fdr, keep);
  {
    std::vector<std::int64_t> top;
    for (std::size_t r = 0; r < order.size() && r < 6; ++r) top.push_back(scores.feature[order[r]]);
    add_top_features(report, table, top, log2 ? "log2(x + 1) of the observed values" : "observed values");
  }
  ReportRecord& record = report.record;
  record.version = PARE_VERSION;
  record.command_line = {"pare", "rank"};
  record.command_line.insert(record.command_line.end(), args.begin(), args.end());
  record.inputs.push_back({"data", input.data, data_hash.get()});
  if (!input.labels.empty())
    record.inputs.push_back({"sample sheet (" + table.label_name + ")", sheet_path_of(input.labels),
                             internal::sha256_file(sheet_path_of(input.labels))});
  if (!input.samples.empty()) record.inputs.push_back({"sample list", input.samples, loaded.sample_list_sha256});
  record.parameters = {{"transform", transform},
                       {"rank_by", criterion_name(criterion)},
                       {"fdr", short_number(fdr)},
                       {"keep", std::to_string(keep)},
                       {"bins", std::to_string(score.bins)},
                       {"mi_estimator", estimator},
                       {"neighbors", std::to_string(score.neighbors)},
                       {"min_class_size", std::to_string(input.min_class_size)}};
  record.timings = {{"read", read_seconds}, {"scoring", scoring_seconds}};
  record.outputs = {"ranking.tsv", "report.html"};

  ensure_directory(common.out);
  const std::string path = join_path(common.out, "ranking.tsv");
  OutputFile ranking_file(path), report_file(join_path(common.out, "report.html"));
  ranking_file.write(ranking_tsv(scores, order, table.feature_names, score.counts_chi2, table.feature_info_names, table.feature_info));
  report_file.write(report_html(report));
  ranking_file.commit();
  report_file.commit();
  if (common.quiet) return 0;

  out << "pare rank: " << table.source << " - " << thousands(table.n_features()) << " features, "
      << thousands(table.n_samples()) << " samples, " << classes.classes.size() << " classes, ranked by "
      << criterion_name(criterion) << ", transform " << transform << "\n";
  print_left_out(out, loaded.left_out, loaded.samples_read, table.n_samples(), input.samples);
  out << "  classes: " << class_counts_text(table) << "\n";
  std::vector<std::vector<std::string>> rows;
  rows.push_back({"rank", "feature", "mi", "chi2", "chi2_q", "f", "f_q"});
  if (score.counts_chi2) rows.front().insert(rows.front().end(), {"chi2_counts", "counts_q"});
  for (std::size_t r = 0; r < order.size() && r < 20; ++r) {
    const std::size_t i = order[r];
    std::vector<std::string> row{std::to_string(r + 1), table.feature_names[static_cast<std::size_t>(scores.feature[i])],
                                 short_number(scores.mi[i]), short_number(scores.chi2[i]),
                                 short_number(scores.chi2_q[i]), short_number(scores.f[i]), short_number(scores.f_q[i])};
    if (score.counts_chi2) {
      row.push_back(short_number(scores.counts[i]));
      row.push_back(short_number(scores.counts_q[i]));
    }
    rows.push_back(std::move(row));
  }
  print_table(out, rows, 2);
  std::int64_t constant = 0, undefined = 0;
  for (std::size_t i = 0; i < scores.size(); ++i) {
    if (scores.flags[i] & kScoreConstant) ++constant;
    else if (!criterion_defined(scores, criterion, i)) ++undefined;
  }
  out << "  kept " << thousands(static_cast<std::int64_t>(order.size())) << " of " << thousands(table.n_features());
  if (fdr < 1) out << " (" << thousands(passing) << " with q <= " << short_number(fdr) << ")";
  out << "; " << thousands(constant) << " constant (scores 0, p 1)";
  if (undefined > 0) out << ", " << thousands(undefined) << " without a defined " << criterion_name(criterion) << " score";
  out << "\n";
  if (keep > 0 && static_cast<std::int64_t>(order.size()) < keep)
    out << "  note: --keep " << keep << " asked for more than the " << thousands(static_cast<std::int64_t>(order.size()))
        << " features that pass" << (fdr < 1 ? " --fdr " + short_number(fdr) : std::string()) << "\n";
  out << "  wrote " << path << ", " << join_path(common.out, "report.html") << "\n";
  return 0;
}

}  // namespace

int run(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  try {
    if (args.empty()) {
      err << kUsage;
      return static_cast<int>(ErrorKind::kUsage);
    }
    const std::string& command = args.front();
    const std::vector<std::string> rest(args.begin() + 1, args.end());
    if (command == "--version" || command == "version") {
      out << "pare " PARE_VERSION "\n";
      return 0;
    }
    if (command == "--help" || command == "-h" || command == "help") {
      out << kUsage;
      return 0;
    }
    set_warning_stream(&err);
    if (command == "scan") return command_scan(rest, out);
    if (command == "rank") return command_rank(rest, out);
    if (command == "reduce") return command_reduce(rest, out);
    if (command == "apply") return command_apply(rest, out);
    if (command == "project") return command_project(rest, out);
    if (command == "demo") return command_demo(rest, out);
    throw_usage_error("unknown command '" + command + "'",
                      "commands: scan, rank, reduce, project, apply, demo; see pare --help");
  } catch (const Error& e) {
    err << "pare: error: " << e.what() << "\n";
    return static_cast<int>(e.kind());
  } catch (const std::bad_alloc&) {
    err << "pare: error: out of memory (use a machine with more memory or a smaller input)\n";
    return static_cast<int>(ErrorKind::kOther);
  } catch (const std::exception& e) {
    err << "pare: error: " << e.what() << "\n";
    return static_cast<int>(ErrorKind::kOther);
  }
}

}  // namespace pare::cli
