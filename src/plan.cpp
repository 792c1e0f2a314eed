#include "pare/plan.h"

#include <nlohmann/json.hpp>

#include <algorithm>      // std::copy_n, std::fill
#include <cmath>          // std::isnan
#include <filesystem>     // std::filesystem::path
#include <limits>         // std::numeric_limits
#include <span>           // std::span
#include <numeric>        // std::iota
#include <unordered_map>  // std::unordered_map

#include "internal/omp.h"
#include "internal/plan_sections.h"
#include "internal/sha256.h"
#include "pare/error.h"
#include "pare/load.h"

namespace pare {

namespace {

using nlohmann::json;

constexpr int kPlanFormat = 1;

// JSON has no NaN: undefined numbers are written as null.
json number_or_null(double v) { return std::isnan(v) ? json(nullptr) : json(v); }

std::string delimiter_text(char d) { return std::string(1, d); }

}  // namespace

json internal::read_section(const RunRecord& run, const FeatureTable& t) {
  return {{"layout", layout_name(t.layout)},
          {"delimiter", delimiter_text(t.delimiter)},
          {"label", run.label},
          {"target", run.target},
          {"na", run.na_tokens},
          {"allow_inf", run.allow_inf},
          {"feature_info", run.feature_info},
          {"sample_info", run.sample_info}};
}

json internal::parameters_section(const ReduceOptions& o, const Reduction& r) {
  return {
      {"missing_filter", o.missing_filter},
      {"drop_missing_above", o.drop_missing_above},
      {"impute", impute_name(o.impute)},
      {"log2", o.log2},
      {"scale", o.scale},
      {"variance_filter", o.variance_filter},
      {"min_variance", o.min_variance},
      {"drop_low_variance", o.drop_low_variance},
      {"supervised", r.supervised},
      {"rank_by", criterion_name(r.criterion)},
      {"fdr", o.fdr},
      {"bins", o.score.bins},
      {"mi_estimator", o.score.mi == MiEstimator::kKnn ? "knn" : "binned"},
      {"neighbors", o.score.neighbors},
      {"prune", o.prune},
      {"max_corr", o.max_corr},
      {"keep", o.keep},
  };
}

json internal::projection_section(const PipelineResult& result, const PlanProjection& pp) {
  if (!result.projection) return nullptr;
  const Projection& pr = *result.projection;
  json feature_center = json::array(), feature_scale = json::array();
  for (Eigen::Index j = 0; j < pr.center.size(); ++j) {
    feature_center.push_back(pr.center(j));
    feature_scale.push_back(pr.scale(j));
  }
  return {{"components", pr.singular_values.size()},
          {"center", result.projection_center},
          {"scale", result.projection_scale},
          {"method", pr.method},
          {"precision", pr.precision},
          {"iterations", pr.iterations},
          {"residual", pr.residual},
          {"loadings", pp.loadings_file},
          {"loadings_sha256", pp.loadings_sha256},
          {"feature_center", feature_center},
          {"feature_scale", feature_scale}};
}

json internal::outputs_section(const FeatureTable& t, const PipelineResult& result, const PlanProjection& pp) {
  json outputs = json::object();
  if (result.options.select) {
    outputs["ranking"] = "ranking.tsv";
    outputs["selection_log"] = "selection-log.tsv";
    outputs["reduced"] = reduced_file_name(t.delimiter);
  }
  if (result.projection) {
    outputs["scores"] = "scores.csv";
    outputs["loadings"] = pp.loadings_file;
    outputs["explained"] = "explained.tsv";
  }
  outputs["samples"] = "samples.tsv";
  outputs["report"] = "report.html";
  return outputs;
}

namespace {

// Which samples the screen flagged and dropped, by id, and its rule.
json screen_section(const PipelineResult& result) {
  const SampleScreen& screen = result.screen;
  const RunSamples& samples = result.samples;
  json flagged = json::array(), dropped = json::array();
  for (const std::int64_t i : screen.flagged()) flagged.push_back(samples.ids[static_cast<std::size_t>(i)]);
  for (std::size_t i = 0; i < samples.dropped.size(); ++i)
    if (samples.dropped[i]) dropped.push_back(samples.ids[i]);
  json section = {{"screened", screen.done},
                  {"rule", screen_rule(screen)},
                  {"flagged", flagged},
                  {"dropped", dropped},
                  {"samples_before_dropping", samples.ids.size()}};
  if (screen.done) section["threshold"] = screen.robust.threshold;
  return section;
}

}  // namespace

namespace {

// What ran before step 1: the samples left out for missing values, the count floor, and the
// normalisation apply replays (the features normalised and, for quantile, the reference).
json clean_section(const FeatureTable& t, const PipelineResult& result) {
  const ReduceOptions& o = result.options.reduce;
  const Reduction& r = result.reduction;
  json sparse = json::array();
  for (const auto& [id, rate] : result.sparse_samples) sparse.push_back({{"sample", id}, {"missing_rate", rate}});
  json clean = {{"drop_samples_missing_above", result.options.drop_samples_missing_above},
                {"samples_left_out", sparse},
                {"count_floor", o.count_floor},
                {"floor_samples", o.floor_samples},
                {"normalize", normalize_name(o.normalize)}};
  if (o.normalize != Normalize::kNone) {
    json names = json::array();
    for (const std::int64_t j : r.normalized) names.push_back(t.feature_names[static_cast<std::size_t>(j)]);
    clean["normalized_features"] = names;
    if (o.normalize == Normalize::kQuantile) clean["quantile_reference"] = r.quantile_reference;
  }
  return clean;
}

}  // namespace

std::string plan_json(const FeatureTable& t, const PipelineResult& result, const RunRecord& run,
                      const PlanProjection& pp) {
  const Reduction& r = result.reduction;
  const ReduceOptions& o = result.options.reduce;
  json plan;
  plan["pare_plan"] = kPlanFormat;
  plan["pare_version"] = PARE_VERSION;
  plan["command_line"] = run.command_line;
  plan["seed"] = run.seed;
  json input = {{"path", run.input_path},
                {"sha256", run.input_sha256},
                {"samples", t.n_samples()},
                {"features", t.n_features()}};
  if (!run.sheet_path.empty())
    input["sample_sheet"] = {{"path", run.sheet_path}, {"sha256", run.sheet_sha256}, {"column", run.sheet_column}};
  plan["input"] = input;
  plan["read"] = internal::read_section(run, t);
  // Which samples the fit used: those of --samples, less those left out for a missing label or a
  // class under --min-class-size (ids listed), less the outliers dropped (sample_screen).
  json samples = {{"in_file", run.samples_read}, {"used", t.n_samples()}};
  if (!run.sample_list_path.empty())
    samples["list"] = {{"path", run.sample_list_path}, {"sha256", run.sample_list_sha256}};
  samples["left_out_unlabelled"] = run.left_out.unlabelled;
  samples["min_class_size"] = run.left_out.min_class_size;
  samples["left_out_small_class"] = run.left_out.small_class;
  samples["small_classes"] = run.left_out.small_classes;
  if (run.split) {
    const SplitRecord& s = *run.split;
    samples["fold"] = {{"repeat", s.repeat},         {"fold", s.fold},     {"folds", s.folds},
                       {"repeats", s.repeats},       {"assignment", s.assignment},
                       {"groups", s.groups},         {"held_out", s.held_out},
                       {"training_samples", s.training_samples}};
  }
  if (run.subsample > 0) samples["subsample"] = {{"asked", run.subsample}, {"ids", run.subsample_ids}};
  plan["samples"] = samples;
  plan["parameters"] = internal::parameters_section(o, r);
  if (o.balance != Balance::kNone) {
    json balance = {{"method", "smallest"}};
    if (r.stability) {
      balance["scored_samples"] = "each subset down-sampled on its own";
    } else {
      json ids = json::array();
      for (const std::int64_t i : r.scored_rows) ids.push_back(t.sample_ids[static_cast<std::size_t>(i)]);
      balance["scored_samples"] = ids;
    }
    plan["balance"] = balance;
  }
  if (result.balanced) {
    const PipelineResult::Balanced& b = *result.balanced;
    json per_class = json::object();
    for (const auto& [name, count] : b.per_class) per_class[name] = count;
    plan["balance_export"] = {{"method", balance_export_name(result.options.balance_export)},
                              {"file", b.file},
                              {"samples_file", "balanced-samples.tsv"},
                              {"samples", b.samples},
                              {"repeated", b.repeated},
                              {"synthetic", b.synthetic},
                              {"per_class", per_class}};
  }
  if (r.stability) {
    const StabilityRecord& st = *r.stability;
    plan["stability"] = {{"resamples", st.options.resamples},
                         {"resample_fraction", st.options.fraction},
                         {"resample_scheme", resample_scheme_name(st.options.scheme)},
                         {"min_stability", st.options.min_stability},
                         {"seed", st.seed},
                         {"subset_samples", {{"min", st.subset_samples_min}, {"max", st.subset_samples_max}}},
                         {"q", st.q},
                         {"p", st.p},
                         {"expected_false_selections_bound", st.bound},
                         {"selected", st.selected}};
  }
  json steps = json::array();
  for (const auto& s : r.steps)
    steps.push_back({{"step", step_name(s.step)}, {"in", s.in}, {"out", s.out}, {"seconds", s.seconds}});
  plan["steps"] = steps;
  json names = json::array(), index = json::array(), fill = json::array(), center = json::array(),
       spread = json::array();
  for (std::size_t k = 0; k < r.kept.size(); ++k) {
    const auto j = static_cast<std::size_t>(r.kept[k]);
    names.push_back(t.feature_names[j]);
    index.push_back(j + 1);
    fill.push_back(static_cast<double>(r.fill[j]));
    center.push_back(number_or_null(r.center[k]));
    spread.push_back(number_or_null(r.scale[k]));
  }
  plan["clean"] = clean_section(t, result);
  plan["transform"] = {{"impute", impute_name(o.impute)}, {"log2", o.log2}, {"scale", o.scale}};
  if (r.knn) {
    // The nearest-neighbour fills of apply: the training values (samples x features, float32) of
    // the features that passed the missing filter, transformed, in the reference file.
    plan["transform"]["knn"] = {{"neighbors", r.knn->neighbors},
                                {"reference", pp.impute_reference_file},
                                {"reference_sha256", pp.impute_reference_sha256},
                                {"samples", r.knn->values.rows()},
                                {"features", r.knn->features}};
  }
  plan["kept"] = {{"count", r.kept.size()},
                  {"names", names},
                  {"input_index", index},
                  {"fill", fill},
                  {"center", center},
                  {"scale", spread}};
  if (result.projection) plan["projection"] = internal::projection_section(result, pp);
  plan["sample_screen"] = screen_section(result);
  plan["outputs"] = internal::outputs_section(t, result, pp);
  return plan.dump(1) + "\n";
}

namespace {

[[noreturn]] void bad_plan(const std::string& path, const std::string& what) {
  throw_input_error({path}, what, "use a plan.json written by pare reduce, unedited");
}

const json& member(const std::string& path, const json& object, const char* key, const char* where) {
  if (!object.is_object()) bad_plan(path, std::string(where) + " must be an object");
  const auto it = object.find(key);
  if (it == object.end()) bad_plan(path, std::string("missing field ") + where + "." + key);
  return *it;
}

template <typename T>
T typed(const std::string& path, const json& value, const std::string& field, const char* type_name) {
  try {
    return value.get<T>();
  } catch (const json::exception&) {
    bad_plan(path, "field " + field + " must be " + type_name);
  }
}

// The reference of transform.knn, its file's SHA-256 checked.
std::shared_ptr<const KnnReference> load_knn_reference(const std::string& path, const json& knn) {
  auto ref = std::make_shared<KnnReference>();
  ref->neighbors = typed<int>(path, member(path, knn, "neighbors", "transform.knn"), "transform.knn.neighbors", "an integer");
  ref->features = typed<std::vector<std::string>>(path, member(path, knn, "features", "transform.knn"),
                                                  "transform.knn.features", "an array of strings");
  const auto samples = typed<std::int64_t>(path, member(path, knn, "samples", "transform.knn"), "transform.knn.samples",
                                           "an integer");
  const auto file = typed<std::string>(path, member(path, knn, "reference", "transform.knn"), "transform.knn.reference",
                                       "a file name");
  const auto sha = typed<std::string>(path, member(path, knn, "reference_sha256", "transform.knn"),
                                      "transform.knn.reference_sha256", "a string");
  if (ref->neighbors < 1 || samples < 1) bad_plan(path, "transform.knn.neighbors and samples must be 1 or more");
  if (file.empty() || file.find('/') != std::string::npos || file == "..")
    bad_plan(path, "transform.knn.reference must be a file name next to plan.json");
  const std::string reference_path = (std::filesystem::path(path).parent_path() / file).string();
  const std::string actual = internal::sha256_file(reference_path);
  if (actual != sha)
    throw_input_error({reference_path}, "SHA-256 " + actual + " does not match the plan's " + sha,
                      "the impute reference was changed after the plan was written; rerun pare reduce");
  ref->values = read_knn_reference_npy(reference_path, samples, static_cast<std::int64_t>(ref->features.size()));
  return ref;
}

}  // namespace

Plan load_plan(const std::string& path) {
  const std::string text = read_file_text(path);
  json plan;
  try {
    plan = json::parse(text);
  } catch (const json::parse_error& e) {
    // nlohmann reports a byte offset; turn it into line and column.
    std::int64_t line = 1, column = 1;
    for (std::size_t i = 0; i + 1 < e.byte && i < text.size(); ++i) {
      if (text[i] == '\n') {
        ++line;
        column = 1;
      } else {
        ++column;
      }
    }
    throw_input_error({path, line, column}, "not valid JSON", "use a plan.json written by pare reduce, unedited");
  } catch (const json::exception& e) {
    // Valid syntax the parser cannot hold, such as a number beyond double's range.
    throw_input_error({path}, std::string("not a usable plan: ") + e.what(),
                      "use a plan.json written by pare reduce, unedited");
  }
  if (!plan.is_object()) bad_plan(path, "the top level must be an object");
  const json& format = member(path, plan, "pare_plan", "plan");
  if (!format.is_number_integer() || format.get<int>() != kPlanFormat)
    bad_plan(path, "not a pare plan of format " + std::to_string(kPlanFormat));
  Plan p;
  p.path = path;
  const json& read = member(path, plan, "read", "plan");
  p.layout = typed<std::string>(path, member(path, read, "layout", "read"), "read.layout", "a string");
  if (p.layout != "rows=samples" && p.layout != "rows=features")
    bad_plan(path, "field read.layout must be rows=samples or rows=features");
  const auto delimiter = typed<std::string>(path, member(path, read, "delimiter", "read"), "read.delimiter", "a string");
  if (delimiter.size() != 1) bad_plan(path, "field read.delimiter must be one character");
  p.delimiter = delimiter[0];
  p.label = typed<std::string>(path, member(path, read, "label", "read"), "read.label", "a string");
  if (const auto it = read.find("target"); it != read.end())
    p.target = typed<bool>(path, *it, "read.target", "true or false");
  p.na_tokens = typed<std::vector<std::string>>(path, member(path, read, "na", "read"), "read.na", "an array of strings");
  p.allow_inf = typed<bool>(path, member(path, read, "allow_inf", "read"), "read.allow_inf", "true or false");
  for (const auto& [key, target] : {std::pair{"feature_info", &p.feature_info}, std::pair{"sample_info", &p.sample_info}})
    if (const auto it = read.find(key); it != read.end())
      *target = typed<std::vector<std::string>>(path, *it, std::string("read.") + key, "an array of strings");
  const json& transform = member(path, plan, "transform", "plan");
  p.log2 = typed<bool>(path, member(path, transform, "log2", "transform"), "transform.log2", "true or false");
  p.scale = typed<bool>(path, member(path, transform, "scale", "transform"), "transform.scale", "true or false");
  const json& kept = member(path, plan, "kept", "plan");
  p.names = typed<std::vector<std::string>>(path, member(path, kept, "names", "kept"), "kept.names", "an array of strings");
  const auto fill = typed<std::vector<double>>(path, member(path, kept, "fill", "kept"), "kept.fill", "an array of numbers");
  // centre and scale may hold null for a feature whose value was undefined; they are only used
  // with transform.scale, where they are always defined.
  auto optional_numbers = [&](const char* key) {
    const json& a = member(path, kept, key, "kept");
    if (!a.is_array()) bad_plan(path, std::string("field kept.") + key + " must be an array of numbers");
    std::vector<double> out;
    for (const auto& v : a) {
      if (v.is_null()) out.push_back(std::numeric_limits<double>::quiet_NaN());
      else if (v.is_number()) out.push_back(v.get<double>());
      else bad_plan(path, std::string("field kept.") + key + " must be an array of numbers");
    }
    return out;
  };
  p.center = optional_numbers("center");
  p.spread = optional_numbers("scale");
  const std::size_t k = p.names.size();
  if (k == 0) bad_plan(path, "field kept.names is empty");
  if (fill.size() != k || p.center.size() != k || p.spread.size() != k)
    bad_plan(path, "fields kept.names, kept.fill, kept.center and kept.scale must have the same length");
  for (std::size_t i = 0; i < k; ++i) {
    p.fill.push_back(static_cast<float>(fill[i]));
    if (p.scale && (std::isnan(p.center[i]) || !(p.spread[i] > 0)))
      bad_plan(path, "kept.center and kept.scale must be numbers (scale > 0) for feature " + p.names[i]);
  }
  if (const auto knn = transform.find("knn"); knn != transform.end()) p.knn = load_knn_reference(path, *knn);
  if (const auto clean = plan.find("clean"); clean != plan.end()) {
    const auto how = typed<std::string>(path, member(path, *clean, "normalize", "clean"), "clean.normalize", "a string");
    if (how != "none" && how != "sum" && how != "quantile") bad_plan(path, "clean.normalize must be none, sum or quantile");
    p.normalize = parse_normalize(how);
    if (p.normalize != Normalize::kNone)
      p.normalized_features = typed<std::vector<std::string>>(path, member(path, *clean, "normalized_features", "clean"),
                                                              "clean.normalized_features", "an array of strings");
    if (p.normalize == Normalize::kQuantile) {
      p.quantile_reference = typed<std::vector<double>>(path, member(path, *clean, "quantile_reference", "clean"),
                                                        "clean.quantile_reference", "an array of numbers");
      if (p.quantile_reference.size() != p.normalized_features.size() ||
          !std::is_sorted(p.quantile_reference.begin(), p.quantile_reference.end()))
        bad_plan(path, "clean.quantile_reference must be ascending, one value per normalised feature");
    }
  }
  const auto projection = plan.find("projection");
  if (projection != plan.end() && !projection->is_null()) {
    const json& pj = *projection;
    p.components = typed<std::int64_t>(path, member(path, pj, "components", "projection"), "projection.components",
                                       "an integer");
    const auto center = typed<std::vector<double>>(path, member(path, pj, "feature_center", "projection"),
                                                   "projection.feature_center", "an array of numbers");
    const auto scale = typed<std::vector<double>>(path, member(path, pj, "feature_scale", "projection"),
                                                  "projection.feature_scale", "an array of numbers");
    const auto file = typed<std::string>(path, member(path, pj, "loadings", "projection"), "projection.loadings",
                                         "a file name");
    const auto sha = typed<std::string>(path, member(path, pj, "loadings_sha256", "projection"),
                                        "projection.loadings_sha256", "a string");
    if (center.size() != k || scale.size() != k || p.components < 1 || p.components > static_cast<std::int64_t>(k))
      bad_plan(path, "projection.feature_center, feature_scale and components do not match kept.names");
    for (double v : scale)
      if (!(v > 0)) bad_plan(path, "projection.feature_scale must hold positive numbers");
    if (file.empty() || file.find('/') != std::string::npos || file == "..")
      bad_plan(path, "projection.loadings must be a file name next to plan.json");
    const std::string loadings_path = (std::filesystem::path(path).parent_path() / file).string();
    const std::string actual = internal::sha256_file(loadings_path);
    if (actual != sha)
      throw_input_error({loadings_path}, "SHA-256 " + actual + " does not match the plan's " + sha,
                        "the loadings file was changed after the plan was written; rerun pare reduce");
    p.pca_center = Eigen::Map<const Eigen::VectorXd>(center.data(), static_cast<Eigen::Index>(k));
    p.pca_scale = Eigen::Map<const Eigen::VectorXd>(scale.data(), static_cast<Eigen::Index>(k));
    p.loadings = read_loadings_tsv(loadings_path, p.names);
    if (p.loadings.cols() != p.components)
      throw_input_error({loadings_path}, "the loadings file has " + std::to_string(p.loadings.cols()) +
                                             " components, the plan " + std::to_string(p.components));
  }
  return p;
}

namespace {

// The kNN fills of the plan's kept features in `data`: its values of the reference features
// (matched by name; absent ones missing), transformed as in training, against the training values.
std::vector<CellFills> knn_apply_fills(const Plan& plan, const FeatureTable& data, int threads) {
  const KnnReference& ref = *plan.knn;
  std::unordered_map<std::string_view, std::int64_t> column_of;
  for (std::int64_t j = 0; j < data.n_features(); ++j) column_of.emplace(data.feature_names[static_cast<std::size_t>(j)], j);
  std::unordered_map<std::string_view, std::int64_t> position;
  for (std::size_t c = 0; c < ref.features.size(); ++c) position.emplace(ref.features[c], static_cast<std::int64_t>(c));
  const Eigen::Index n = data.values.rows();
  Matrix x(n, static_cast<Eigen::Index>(ref.features.size()));
  for (std::size_t c = 0; c < ref.features.size(); ++c) {
    const auto it = column_of.find(ref.features[c]);
    const std::span<float> y(x.col(static_cast<Eigen::Index>(c)).data(), static_cast<std::size_t>(n));
    if (it == column_of.end()) {
      std::fill(y.begin(), y.end(), std::numeric_limits<float>::quiet_NaN());
      continue;
    }
    std::copy_n(data.values.col(it->second).data(), n, y.data());
    for (float& v : y)
      if (!std::isnan(v) && plan.log2 && v < 0) v = std::numeric_limits<float>::quiet_NaN();  // reported below
    transform_column(y, plan.log2);
  }
  std::vector<std::int64_t> fill, own(ref.features.size());
  std::iota(own.begin(), own.end(), std::int64_t{0});
  std::vector<float> fallback;
  for (std::size_t i = 0; i < plan.names.size(); ++i) {
    const auto it = position.find(plan.names[i]);
    if (it == position.end()) throw Error(ErrorKind::kInput, plan.path + ": kept feature " + plan.names[i] +
                                                                 " is not in transform.knn.features");
    fill.push_back(it->second);
    fallback.push_back(transform_value(plan.fill[i], plan.log2));
  }
  return knn_fills(x, own, ref, fill, fill, fallback, false, threads);
}

}  // namespace

namespace {
FeatureTable apply_selection(const Plan& plan, const FeatureTable& data, bool allow_missing, ApplyReport& report,
                             int threads);
}  // namespace

FeatureTable apply_plan(const Plan& plan, const FeatureTable& data, bool allow_missing, ApplyReport& report,
                        int threads) {
  if (plan.normalize == Normalize::kNone) return apply_selection(plan, data, allow_missing, report, threads);
  // First every sample normalised as in training, over the plan's features it has (a copy).
  FeatureTable normalized = data;
  std::unordered_map<std::string_view, std::int64_t> column_of;
  for (std::int64_t j = 0; j < data.n_features(); ++j) column_of.emplace(data.feature_names[static_cast<std::size_t>(j)], j);
  std::vector<std::int64_t> columns;
  for (const auto& name : plan.normalized_features)
    if (const auto it = column_of.find(name); it != column_of.end()) columns.push_back(it->second);
  if (plan.normalize == Normalize::kSum)
    normalize_sum(normalized.values, columns, normalized.sample_ids, normalized.feature_names, data.source);
  else
    quantile_map(normalized.values, columns, plan.quantile_reference, threads);
  return apply_selection(plan, normalized, allow_missing, report, threads);
}

namespace {

FeatureTable apply_selection(const Plan& plan, const FeatureTable& data, bool allow_missing, ApplyReport& report,
                             int threads) {
  std::unordered_map<std::string_view, std::int64_t> column_of;
  column_of.reserve(static_cast<std::size_t>(data.n_features()) * 2);
  std::unordered_map<std::string_view, int> used;
  for (std::int64_t j = 0; j < data.n_features(); ++j) {
    const auto [it, fresh] = column_of.emplace(data.feature_names[static_cast<std::size_t>(j)], j);
    if (!fresh) it->second = -2;  // duplicate name: ambiguous
  }
  const std::size_t k = plan.names.size();
  std::vector<std::int64_t> source(k, -1);
  report = ApplyReport{};
  for (std::size_t i = 0; i < k; ++i) {
    const auto it = column_of.find(plan.names[i]);
    if (it == column_of.end()) {
      report.absent.push_back(plan.names[i]);
      continue;
    }
    if (it->second == -2)
      throw_input_error({data.source}, "feature " + plan.names[i] + " of the plan appears more than once in the data",
                        "feature names must be unique to be matched");
    source[i] = it->second;
  }
  // Filling most of the plan from training values would give every sample nearly the same row
  // (a wrong layout does exactly that): more than half absent is refused even when filling is
  // allowed, and when the plan's names are this file's sample ids the other layout is named.
  const auto layout_hint = [&]() -> std::string {
    std::unordered_map<std::string_view, char> ids;
    for (const auto& id : data.sample_ids) ids.emplace(id, 1);
    std::size_t as_ids = 0;
    for (const auto& name : plan.names) as_ids += ids.count(name);
    if (2 * as_ids <= k) return "";
    return std::to_string(as_ids) + " of them are sample ids of this file: read it with `layout` " +
           (data.layout == Layout::kRowsAreSamples ? "rows=features" : "rows=samples");
  };
  if (2 * report.absent.size() > k) {
    const std::string hint = layout_hint();
    throw_input_error({data.source},
                      std::to_string(report.absent.size()) + " of the plan's " + std::to_string(k) +
                          " features are not in the data (read as " +
                          (data.layout == Layout::kRowsAreSamples ? "rows=samples" : "rows=features") +
                          "), too many to fill with training values",
                      hint.empty() ? "check that this is the kind of data the plan was made on, and the names" : hint);
  }
  if (!report.absent.empty() && !allow_missing) {
    std::string names;
    for (std::size_t i = 0; i < report.absent.size() && i < 10; ++i) names += (i ? ", " : "") + report.absent[i];
    if (report.absent.size() > 10) names += ", ...";
    throw_input_error({data.source},
                      std::to_string(report.absent.size()) + " of the plan's " + std::to_string(k) +
                          " features are not in the data: " + names,
                      "check the layout and the names, or pass `allow_missing_features` to fill them with the "
                      "training values");
  }
  report.extra = data.n_features() - static_cast<std::int64_t>(k - report.absent.size());

  FeatureTable out;
  const Eigen::Index n = data.values.rows();
  out.values.resize(n, static_cast<Eigen::Index>(k));
  out.feature_names = plan.names;
  out.sample_ids = data.sample_ids;
  out.labels = data.labels;
  out.label_name = data.label_name;
  out.sample_info_names = data.sample_info_names;
  out.sample_info = data.sample_info;
  out.id_name = data.id_name;
  out.source = data.source;
  out.delimiter = data.delimiter;
  out.layout = data.layout;
  report.filled.assign(k, 0);
  // The same column steps as the reduction: the transform, the gaps filled with the training
  // value, the training centre and scale.
  // With --impute knn the gaps are first filled from the nearest training samples.
  const std::vector<CellFills> knn = plan.knn ? knn_apply_fills(plan, data, threads) : std::vector<CellFills>();
#pragma omp parallel for schedule(dynamic, 16) num_threads(internal::thread_count(threads))
  for (std::size_t i = 0; i < k; ++i) {
    const std::span<float> y(out.values.col(static_cast<Eigen::Index>(i)).data(), static_cast<std::size_t>(n));
    if (source[i] >= 0)
      std::copy_n(data.values.col(source[i]).data(), n, y.data());
    else
      std::fill(y.begin(), y.end(), std::numeric_limits<float>::quiet_NaN());
    transform_column(y, plan.log2);
    if (!knn.empty()) {
      for (const auto& [row, value] : knn[i]) y[static_cast<std::size_t>(row)] = value;
      report.filled[i] = static_cast<std::int64_t>(knn[i].size());
    }
    report.filled[i] += fill_column(y, plan.fill[i], plan.log2);
    if (plan.scale) standardise_column(y, plan.center[i], plan.spread[i]);
  }
  if (plan.log2)
    for (std::size_t i = 0; i < k; ++i)
      if (source[i] >= 0 && (data.values.col(source[i]).array() < 0).any())
        throw_input_error({data.source}, "feature " + plan.names[i] + " has negative values, but the plan applies log2",
                          "the new data must be on the same scale as the training data");
  return out;
}

}  // namespace

}  // namespace pare
