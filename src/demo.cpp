#include "pare/demo.h"

#include <algorithm>      // std::swap
#include <cmath>          // std::exp, std::sqrt
#include <cstdio>         // std::snprintf
#include <sstream>        // std::ostringstream
#include <unordered_map>  // std::unordered_map
#include <vector>         // std::vector

#include "internal/format.h"
#include "pare/text.h"
#include "internal/random.h"
#include "pare/error.h"
#include "pare/io.h"

namespace pare {

namespace {

enum class Role { kBackground, kInformative, kCopy, kNearConstant, kConstant, kMostlyMissing };

const char* role_name(Role r) {
  switch (r) {
    case Role::kInformative: return "informative";
    case Role::kCopy: return "redundant_copy";
    case Role::kNearConstant: return "near_constant";
    case Role::kConstant: return "constant";
    case Role::kMostlyMissing: return "mostly_missing";
    case Role::kBackground: break;
  }
  return "background";
}

struct FeaturePlan {
  Role role = Role::kBackground;
  std::int64_t module = -1;    // informative: its module
  std::int64_t copy_of = -1;   // copy: the informative feature it copies
  double loading = 0;          // informative: weight on the module factor
  double batch_shift = 0;      // in sd units, applied to batch B
  double missing_rate = 0;
};

using internal::shuffle;

std::string name_of(const char* prefix, std::int64_t i, int width) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%s%0*lld", prefix, width, static_cast<long long>(i + 1));
  return buffer;
}

// Which samples are tolerant and which are in batch B (1 each).
struct DemoSamples {
  std::vector<int> tolerant, batch_b;
};

// Independent draws, so batch and class are not confounded.
DemoSamples draw_samples(const DemoScenario& s, internal::Rng& rng) {
  const std::int64_t n = s.samples;
  DemoSamples d{std::vector<int>(static_cast<std::size_t>(n), 0),
                std::vector<int>(static_cast<std::size_t>(n), 0)};
  for (std::int64_t i = 0; i < s.tolerant; ++i) d.tolerant[static_cast<std::size_t>(i)] = 1;
  shuffle(d.tolerant, rng);
  for (std::int64_t i = 0; i < n / 2; ++i) d.batch_b[static_cast<std::size_t>(i)] = 1;
  shuffle(d.batch_b, rng);
  return d;
}

// Module factors: a class effect plus noise, standardised to unit variance over the samples.
std::vector<std::vector<double>> module_factors(const DemoScenario& s,
                                                const std::vector<int>& tolerant,
                                                internal::Rng& rng) {
  const std::int64_t n = s.samples;
  std::vector<std::vector<double>> factor(static_cast<std::size_t>(s.modules));
  const double share = static_cast<double>(s.tolerant) / static_cast<double>(n);
  for (auto& f : factor) {
    const double effect = rng.uniform(1.4, 2.4);
    f.resize(static_cast<std::size_t>(n));
    for (std::int64_t i = 0; i < n; ++i)
      f[static_cast<std::size_t>(i)] =
          effect * (tolerant[static_cast<std::size_t>(i)] - share) + rng.normal();
    const double sd = std::sqrt(effect * effect * share * (1 - share) + 1.0);
    for (auto& x : f) x /= sd;
  }
  return factor;
}

// The planted role of every feature, and the informative ones in planting order.
struct DemoPlan {
  std::vector<FeaturePlan> features;
  std::vector<std::int64_t> informative;
};

// Roles, scattered over the feature order; missing rates and batch shifts.
DemoPlan plan_features(const DemoScenario& s, std::int64_t n_near_constant, internal::Rng& rng) {
  const std::int64_t p = s.features;
  std::vector<std::int64_t> order(static_cast<std::size_t>(p));
  for (std::int64_t j = 0; j < p; ++j) order[static_cast<std::size_t>(j)] = j;
  shuffle(order, rng);
  DemoPlan d{std::vector<FeaturePlan>(static_cast<std::size_t>(p)), {}};
  std::vector<FeaturePlan>& plan = d.features;
  std::size_t next = 0;
  for (std::int64_t m = 0; m < s.modules; ++m)
    for (std::int64_t k = 0; k < s.module_size; ++k) {
      FeaturePlan& f = plan[static_cast<std::size_t>(order[next++])];
      f.role = Role::kInformative;
      f.module = m;
      // Two members with loadings a, b correlate at a*b: 0.78..0.9 gives r of about 0.6..0.8.
      f.loading = rng.uniform(0.78, 0.9);
      d.informative.push_back(order[next - 1]);
    }
  for (std::int64_t c = 0; c < s.copies; ++c) {
    FeaturePlan& f = plan[static_cast<std::size_t>(order[next++])];
    f.role = Role::kCopy;
    f.copy_of = d.informative[static_cast<std::size_t>(c) % d.informative.size()];
  }
  for (std::int64_t c = 0; c < n_near_constant; ++c)
    plan[static_cast<std::size_t>(order[next++])].role =
        c % 4 == 0 ? Role::kConstant : Role::kNearConstant;
  double planted_missing = 0;
  for (std::int64_t c = 0; c < s.mostly_missing; ++c) {
    FeaturePlan& f = plan[static_cast<std::size_t>(order[next++])];
    f.role = Role::kMostlyMissing;
    f.missing_rate = rng.uniform(0.3, 0.6);
    planted_missing += f.missing_rate;
  }
  // The remaining cells get a uniform rate so that the total comes to missing_fraction.
  const double background_rate =
      std::max(0.0, (s.missing_fraction * static_cast<double>(p) - planted_missing) /
                        static_cast<double>(p - s.mostly_missing));
  for (auto& f : plan) {
    if (f.role != Role::kMostlyMissing) f.missing_rate = background_rate;
    if (f.role == Role::kBackground && rng.uniform() < s.batch_fraction)
      f.batch_shift = rng.uniform(0.4, 1.0) * (rng.uniform() < 0.5 ? -1 : 1);
  }
  return d;
}

// What the generator of the values needs: the samples, the module factors and the plan.
struct DemoDraw {
  std::uint64_t seed = 0;
  std::int64_t n = 0;
  const DemoSamples& samples;
  const std::vector<std::vector<double>>& factor;
  const DemoPlan& plan;
};

// Feature j's latent standard-normal values: its module factor plus noise when informative, noise
// otherwise, plus its batch shift in batch B.
std::vector<double> latent_of(const DemoDraw& w, std::int64_t j, internal::Rng& r) {
  const FeaturePlan& f = w.plan.features[static_cast<std::size_t>(j)];
  std::vector<double> z(static_cast<std::size_t>(w.n));
  const double noise = std::sqrt(1 - f.loading * f.loading);
  for (std::int64_t i = 0; i < w.n; ++i) {
    const auto ii = static_cast<std::size_t>(i);
    z[ii] = f.role == Role::kInformative
                ? f.loading * w.factor[static_cast<std::size_t>(f.module)][ii] + noise * r.normal()
                : r.normal();
    z[ii] += f.batch_shift * w.samples.batch_b[ii];
  }
  return z;
}

// A near-copy tracks its original at r = 0.97 but carries more of the original's own
// (technical) noise and less of the biology: with z = a L + s e (L the module factor, e the
// original's noise), copy = 0.97 z + 0.2431 (0.8 (a e - s L) + 0.6 u), u fresh noise. The
// added part is orthogonal to z, so r(copy, z) = 0.97 exactly in expectation, while the
// copy's correlation with L drops from a to about 0.97 a - 0.19 s. Pruning should keep the
// original and drop the copy, naming the original.
std::vector<double> copy_latent(const DemoDraw& w, const FeaturePlan& f,
                                const std::vector<std::vector<double>>& latent, internal::Rng& r) {
  const FeaturePlan& o = w.plan.features[static_cast<std::size_t>(f.copy_of)];
  const auto& src = latent[static_cast<std::size_t>(f.copy_of)];
  const auto& factor_l = w.factor[static_cast<std::size_t>(o.module)];
  const double a = o.loading, s_noise = std::sqrt(1 - a * a);
  constexpr double kR = 0.97, kAside = 0.2431049156;  // sqrt(1 - 0.97^2)
  std::vector<double> z(static_cast<std::size_t>(w.n));
  for (std::int64_t i = 0; i < w.n; ++i) {
    const auto ii = static_cast<std::size_t>(i);
    const double e = (src[ii] - a * factor_l[ii]) / s_noise;
    z[ii] = kR * src[ii] + kAside * (0.8 * (a * e - s_noise * factor_l[ii]) + 0.6 * r.normal());
  }
  return z;
}

// Feature j's line of the matrix: its name, then a level per sample or nothing where missing.
// Levels are log-normal: exp(mu + sd * z).
std::string expression_line(const DemoDraw& w, std::int64_t j, const std::vector<double>& z,
                            internal::Rng& r) {
  const FeaturePlan& f = w.plan.features[static_cast<std::size_t>(j)];
  const double mu = r.uniform(1.5, 7.0);
  const double sd = (f.role == Role::kInformative || f.role == Role::kCopy) ? r.uniform(0.2, 0.5)
                                                                            : r.uniform(0.2, 1.0);
  std::string line = name_of("TR", j, 5);
  for (std::int64_t i = 0; i < w.n; ++i) {
    line += ',';
    const bool missing = r.uniform() < f.missing_rate;
    double value;
    switch (f.role) {
      // (Near-)constant transcripts sit at a low detection floor; the near-constant ones jitter
      // by about 1e-5, far below any biological variation.
      case Role::kConstant:
        value = std::exp(mu - 5.0);
        break;
      case Role::kNearConstant:
        value = std::exp(mu - 5.0) + 1e-5 * z[static_cast<std::size_t>(i)];
        break;
      default:
        value = std::exp(mu + sd * z[static_cast<std::size_t>(i)]);
        break;
    }
    if (!missing) internal::append_rounded(line, value, 7);
  }
  line += '\n';
  return line;
}

// Every feature's line. Feature j draws from its own stream, so lines can be generated in
// parallel and still be identical for a given seed.
std::vector<std::string> expression_lines(const DemoDraw& w) {
  const auto p = static_cast<std::int64_t>(w.plan.features.size());
  std::vector<std::string> lines(static_cast<std::size_t>(p));
  std::vector<std::vector<double>> latent(static_cast<std::size_t>(p));
  // Informative latents first: the copies need them.
  for (const auto j : w.plan.informative) {
    internal::Rng r(w.seed, 1000 + static_cast<std::uint64_t>(j));
    latent[static_cast<std::size_t>(j)] = latent_of(w, j, r);
  }
#pragma omp parallel for schedule(dynamic, 64)
  for (std::int64_t j = 0; j < p; ++j) {
    const FeaturePlan& f = w.plan.features[static_cast<std::size_t>(j)];
    internal::Rng r(w.seed, 1000 + static_cast<std::uint64_t>(j));
    std::vector<double> z;
    if (f.role == Role::kInformative) {
      z = latent[static_cast<std::size_t>(j)];
      for (std::int64_t i = 0; i < w.n; ++i) r.normal();  // keep the stream where latent_of left it
    } else if (f.role == Role::kCopy) {
      z = copy_latent(w, f, latent, r);
    } else {
      z = latent_of(w, j, r);
    }
    lines[static_cast<std::size_t>(j)] = expression_line(w, j, z, r);
  }
  return lines;
}

// The matrix, rows=features, gzip CSV; `lines` are released as they are copied.
void write_expression(const std::string& path, std::int64_t n, std::vector<std::string>& lines) {
  std::string text = "transcript";
  for (std::int64_t i = 0; i < n; ++i) text += ',' + name_of("P", i, 3);
  text += '\n';
  std::size_t total = text.size();
  for (const auto& l : lines) total += l.size();
  text.reserve(total);
  for (auto& l : lines) {
    text += l;
    std::string().swap(l);
  }
  OutputFile out(path);
  out.write_gzip(text, 6);
  out.commit();
}

void write_sample_sheet(const std::string& path, const DemoSamples& d) {
  std::string text = "sample,condition,batch\n";
  for (std::size_t i = 0; i < d.tolerant.size(); ++i)
    text += name_of("P", static_cast<std::int64_t>(i), 3) +
            (d.tolerant[i] ? ",tolerant," : ",sensitive,") + (d.batch_b[i] ? "B" : "A") + '\n';
  write_file_atomically(path, text);
}

void write_truth(const std::string& path, const std::vector<FeaturePlan>& plan) {
  std::string text = "feature\trole\tmodule\tcopy_of\tbatch_shift\n";
  for (std::size_t j = 0; j < plan.size(); ++j) {
    const FeaturePlan& f = plan[j];
    text += name_of("TR", static_cast<std::int64_t>(j), 5);
    text += '\t';
    text += role_name(f.role);
    text += '\t';
    if (f.module >= 0) {
      text += 'M';
      text += std::to_string(f.module + 1);
    }
    text += '\t';
    if (f.copy_of >= 0) text += name_of("TR", f.copy_of, 5);
    text += '\t';
    internal::append_rounded(text, f.batch_shift, 3);
    text += '\n';
  }
  write_file_atomically(path, text);
}

}  // namespace

DemoFiles write_demo(const std::string& dir, std::uint64_t seed, const DemoScenario& s) {
  const std::int64_t n = s.samples, p = s.features;
  const std::int64_t n_informative = s.modules * s.module_size;
  const auto n_near_constant =
      static_cast<std::int64_t>(s.near_constant_fraction * static_cast<double>(p) + 0.5);
  if (s.tolerant <= 0 || s.tolerant >= n ||
      n_informative + s.copies + n_near_constant + s.mostly_missing > p)
    throw Error(ErrorKind::kUsage, "demo scenario does not fit its feature count");
  ensure_directory(dir);
  internal::Rng rng(seed, 0);
  const DemoSamples samples = draw_samples(s, rng);
  const std::vector<std::vector<double>> factor = module_factors(s, samples.tolerant, rng);
  const DemoPlan plan = plan_features(s, n_near_constant, rng);
  std::vector<std::string> lines = expression_lines({seed, n, samples, factor, plan});

  DemoFiles files{dir + "/greenhouse-expression.csv.gz", dir + "/greenhouse-samples.csv",
                  dir + "/greenhouse-truth.tsv"};
  write_expression(files.data, n, lines);
  write_sample_sheet(files.samples, samples);
  write_truth(files.truth, plan.features);
  return files;
}

}  // namespace pare

namespace pare {

DemoRecovery evaluate_demo(const std::string& truth_path, const FeatureTable& table, const Reduction& r) {
  const std::string text = read_file_text(truth_path);
  struct Truth {
    std::string role, module, copy_of;
  };
  std::unordered_map<std::string, Truth> truth;
  std::size_t pos = text.find('\n');  // skip the header
  while (pos != std::string::npos && pos + 1 < text.size()) {
    const std::size_t end = text.find('\n', pos + 1);
    const auto fields = split_fields(std::string_view(text).substr(pos + 1, end - pos - 1), '\t');
    if (fields.size() >= 4) truth[fields[0]] = {fields[1], fields[2], fields[3]};
    pos = end;
  }
  DemoRecovery d;
  d.kept = static_cast<std::int64_t>(r.kept.size());
  for (std::size_t j = 0; j < table.feature_names.size(); ++j) {
    const auto it = truth.find(table.feature_names[j]);
    if (it == truth.end()) continue;
    const Truth& t = it->second;
    const Decision& dec = r.decisions[j];
    if (t.role == "informative") {
      ++d.informative;
      if (dec.kept) ++d.informative_kept;
    } else if (t.role == "redundant_copy") {
      ++d.copies;
      if (dec.step == Step::kRedundancy) {
        ++d.copies_redundant;
        const std::string twin = table.feature_names[static_cast<std::size_t>(dec.partner)];
        const auto tw = truth.find(twin);
        const auto original = truth.find(t.copy_of);
        if (twin == t.copy_of ||
            (tw != truth.end() && original != truth.end() && !tw->second.module.empty() &&
             tw->second.module == original->second.module))
          ++d.copies_named_twin;
      }
    } else if (t.role == "near_constant" || t.role == "constant") {
      ++d.near_constant;
      if (dec.step == Step::kVariance) ++d.near_constant_variance;
    } else if (t.role == "mostly_missing") {
      ++d.mostly_missing;
      if (dec.step == Step::kMissing) ++d.mostly_missing_missing;
    }
  }
  for (const std::int64_t j : r.kept) {
    const auto it = truth.find(table.feature_names[static_cast<std::size_t>(j)]);
    if (it != truth.end() && it->second.role == "informative") ++d.kept_planted;
  }
  return d;
}

namespace {

std::string shares_text(const std::vector<double>& share) {
  std::string out;
  for (std::size_t c = 0; c < share.size(); ++c)
    out += (c ? ", PC" : "PC") + std::to_string(c + 1) + " " + fixed(share[c], 2);
  return out;
}

std::string ratio_text(std::int64_t part, std::int64_t whole) {
  return fixed(whole ? static_cast<double>(part) / static_cast<double>(whole) : 0, 2);
}

}  // namespace

std::string demo_recovery_text(const DemoRecovery& d, const std::string& truth, const PipelineResult& run,
                               const std::vector<std::string>& batches) {
  std::ostringstream out;
  out << "planted truth (" << truth << "):\n";
  out << "  informative transcripts kept   " << d.informative_kept << " of " << d.informative << " (recall "
      << ratio_text(d.informative_kept, d.informative) << ")\n";
  out << "  kept that are informative      " << d.kept_planted << " of " << d.kept << " (precision "
      << ratio_text(d.kept_planted, d.kept) << "; the rest are background picked to fill `keep` 200)\n";
  out << "  near-copies dropped redundant  " << d.copies_redundant << " of " << d.copies << " ("
      << d.copies_named_twin << " naming their original or a module-mate)\n";
  out << "  (near-)constant by variance    " << d.near_constant_variance << " of " << d.near_constant << "\n";
  out << "  mostly-missing by missing      " << d.mostly_missing_missing << " of " << d.mostly_missing << "\n";
  // The planted batch shift: how much of each component lies between the two batches.
  if (run.screen.done)
    out << "  batch shift, share of variance between batches: "
        << shares_text(between_group_share(run.screen.scores, batches)) << " on the screen's PCA of all transcripts";
  if (run.projection) out << "; " << shares_text(between_group_share(run.projection->scores, batches)) << " on the 200 kept";
  out << "\n  (colour by batch in the report: reduce `mark_by` batch)\n";
  return out.str();
}

}  // namespace pare
