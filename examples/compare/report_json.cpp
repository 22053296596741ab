// The full result as JSON, built with nlohmann-json.
#include <nlohmann/json.hpp>

#include "flag_text.hpp"
#include "report.hpp"

namespace rowfold_compare {
namespace {

using nlohmann::json;

json solverJson(const Comparison& c, const SolverOutcome& o) {
  const Summary& s = o.summary;
  json j;
  j["name"] = solverName(o.kind);
  j["status"] = rowfold::nameOf(o.status);
  j["rows_folded"] = o.folded;
  j["rows_in_fit"] = s.count;
  j["rows_refused"] = o.refused;
  j["refusal"] = o.refused > 0 ? json(rowfold::nameOf(o.refusal)) : json(nullptr);
  j["ns_per_sample"] = o.nsPerSample;
  j["max_relative_deviation"] = o.maxDeviation;
  const auto terms = c.terms();
  json list = json::array();
  for (std::size_t t = 0; t < terms.size(); ++t) {
    const TermValues v = termValues(s, c.intercept, t);
    list.push_back({{"term", terms[t]},
                    {"estimate", v.estimate},
                    {"std_error", v.standardError},
                    {"lower", v.lower},
                    {"upper", v.upper},
                    {"correct_digits", v.digits},
                    {"relative_deviation", t < o.deviation.size() ? json(o.deviation[t]) : json(nullptr)}});
  }
  j["terms"] = list;
  j["residual_standard_error"] = s.residualStandardError;
  j["residual_dof"] = s.residualDof;
  j["r_squared"] = s.rSquared;
  j["adjusted_r_squared"] = s.adjustedRSquared;
  j["f_statistic"] = s.fStatistic;
  j["sse"] = s.sse;
  j["sst"] = s.sst;
  j["effective_samples"] = s.effectiveCount;
  j["weight_sum"] = s.weightSum;
  j["conditioning"] = {
      {"scaled_condition", s.conditioning.scaledCondition},
      {"gram_condition", s.conditioning.gramCondition},
      {"least_squares_condition", s.conditioning.lsCondition},
      {"rank", s.conditioning.rank},
      {"vif", std::vector<double>(s.conditioning.vif.data(), s.conditioning.vif.data() + s.conditioning.vif.size())}};
  json flags = json::array();
  for (rowfold::Flag f : rowfold::kAllFlags)
    if (s.flags.has(f)) flags.push_back({{"flag", rowfold::nameOf(f)}, {"text", flagSentence(f)}});
  j["warnings"] = flags;
  return j;
}

}  // namespace

void writeJson(std::ostream& out, const Comparison& c) {
  json j;
  j["tool"] = "rowfold-compare";
  j["file"] = c.file;
  j["response"] = c.response;
  j["inputs"] = c.inputs;
  j["weights"] = c.weights.empty() ? json(nullptr) : json(c.weights);
  j["intercept"] = c.intercept;
  j["forgetting"] = c.forgetting;
  j["level"] = c.level;
  j["window"] = c.window == 0 ? json(nullptr)
                              : json({{"rows", c.window},
                                      {"blocks", c.windowBlocks},
                                      {"block_rows", c.windowBlockRows},
                                      {"batch_rows", c.windowBlocks * c.windowBlockRows}});
  j["rows"] = {{"data_lines", c.rows.dataLines},
               {"used", c.rows.used},
               {"skipped_missing", c.rows.skipped},
               {"first_skipped_line", c.rows.skipped > 0 ? json(c.rows.firstSkippedLine) : json(nullptr)}};
  j["reference"] = {{"solver", "GivensQr<long double>"},
                    {"significand_bits", c.referenceBits},
                    {"available", c.referenceOk},
                    {"terms", c.terms()},
                    {"estimates", c.reference}};
  json solvers = json::array();
  for (const SolverOutcome& o : c.solvers) solvers.push_back(solverJson(c, o));
  j["solvers"] = solvers;
  // Invalid UTF-8 in column names is replaced rather than refused.
  out << j.dump(2, ' ', false, json::error_handler_t::replace) << '\n';
}

}  // namespace rowfold_compare
