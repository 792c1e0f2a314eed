// The plan of a finished reduction as a JSON document, for the command line, which writes its
// text and fills the report's run record from the same document (parsing several megabytes of
// plan.json back would cost about as much as writing it).
#pragma once

#include <nlohmann/json.hpp>

#include <string>  // std::string

#include "pare/plan.h"
#include "pare/report.h"

namespace pare::internal {

/// What plan_json writes, before it is text.
nlohmann::json plan_document(const FeatureTable& table, const Reduction& reduction, const ReduceOptions& options,
                             const RunRecord& run, const PlanProjection& projection = {});

/// The text of a plan document as plan.json holds it.
std::string plan_text(const nlohmann::json& plan);

/// add_plan_record from the document rather than its text.
void add_plan_record(ReportData& data, const nlohmann::json& plan);

}  // namespace pare::internal
