// The commands that run the reduction pipeline: reduce, project, apply, and the demo's reduction.
#pragma once

#include <ostream>  // std::ostream
#include <string>   // std::string
#include <vector>   // std::vector

#include "cli/options.h"

namespace pare::cli {

int command_reduce(const std::vector<std::string>& args, std::ostream& out);
int command_apply(const std::vector<std::string>& args, std::ostream& out);
int command_project(const std::vector<std::string>& args, std::ostream& out);
/// pare folds: fold-wise reduce on the training samples and apply on the held-out ones.
int command_folds(const std::vector<std::string>& args, std::ostream& out);

/// Reduces the demo data into common.out/reduce and reports recovery of the planted truth.
int demo_reduce(const std::string& data, const std::string& samples, const std::string& truth,
                const CommonOptions& common, std::ostream& out);

}  // namespace pare::cli
