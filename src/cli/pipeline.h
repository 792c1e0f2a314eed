// The commands that run the reduction pipeline: reduce, apply, and the demo's reduction.
#pragma once

#include <ostream>  // std::ostream
#include <string>   // std::string
#include <vector>   // std::vector

#include "cli/options.h"
#include "pare/outliers.h"

namespace pare::cli {

int command_reduce(const std::vector<std::string>& args, std::ostream& out);
int command_apply(const std::vector<std::string>& args, std::ostream& out);
int command_project(const std::vector<std::string>& args, std::ostream& out);

/// Prints one line on the sample screen: how many samples were flagged (and dropped), and which.
void print_sample_screen(std::ostream& out, const SampleScreen& screen, const std::vector<std::string>& ids,
                         const std::vector<char>& dropped, const std::string& label = "  samples: ");

/// Prints one line on the samples used, when some were left out: how many of the file's, and why
/// (--samples, missing labels, --min-class-size).
void print_left_out(std::ostream& out, const SamplesLeftOut& left, std::int64_t samples_read, std::int64_t samples_used,
                    const std::string& sample_list);

/// The classes of `table` and their sample counts, e.g. "condition - sensitive 180, tolerant 60".
std::string class_counts_text(const FeatureTable& table);

/// Reduces the demo data into common.out/reduce and reports recovery of the planted truth.
int demo_reduce(const std::string& data, const std::string& samples, const std::string& truth,
                const CommonOptions& common, std::ostream& out);

}  // namespace pare::cli
