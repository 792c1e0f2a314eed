// The parts of a run's record that plan.json and the report's run record both show, built from
// the run itself (not from the plan's text) by the two writers.
#pragma once

#include <nlohmann/json.hpp>

#include "pare/plan.h"

namespace pare::internal {

/// plan.json "read": the table's layout and delimiter; label, missing-value tokens, inf and
/// annotation columns as the run read them.
nlohmann::json read_section(const RunRecord& run, const FeatureTable& table);
/// plan.json "parameters": the selection's options.
nlohmann::json parameters_section(const ReduceOptions& options, const Reduction& reduction);
/// plan.json "projection" (null without one).
nlohmann::json projection_section(const PipelineResult& result, const PlanProjection& projection);
/// plan.json "outputs": role -> file name, for the files the run wrote.
nlohmann::json outputs_section(const FeatureTable& table, const PipelineResult& result,
                               const PlanProjection& projection);

}  // namespace pare::internal
