// Fills the Comparison once every row has been folded.
#include "comparison.hpp"

#include <cmath>
#include <limits>

namespace rowfold_compare {

void finishComparison(const std::vector<std::unique_ptr<Contender>>& contenders, const Reference& reference,
                      Comparison& out) {
  Reference::Vector refB;
  Reference::Scalar refB0 = 0;
  out.referenceOk = reference.solve(refB, refB0);
  out.referenceBits = Reference::precisionBits();
  std::vector<Reference::Scalar> ref;
  if (out.intercept) ref.push_back(refB0);
  for (Eigen::Index j = 0; j < refB.size(); ++j) ref.push_back(refB(j));
  out.reference.assign(ref.begin(), ref.end());

  for (const auto& c : contenders) {
    SolverOutcome o;
    o.kind = c->kind();
    o.summary = Summary(static_cast<Eigen::Index>(out.inputs.size()));
    o.status = c->summarize(o.summary, out.level);
    o.folded = c->folded();
    o.refused = c->refused();
    o.refusal = c->refusal();
    o.nsPerSample = o.folded > 0 ? 1e9 * c->foldSeconds() / static_cast<double>(o.folded)
                                 : std::numeric_limits<double>::quiet_NaN();
    // Comparable only when the solver holds the same rows as the reference and has a fit. With a
    // window, BatchQr's ring holds the last W = B b rows, the block windows W + (used mod b).
    const bool sameRows = o.refused == 0 && (out.window == 0 || o.kind != SolverKind::batch_qr ||
                                             out.rows.used % static_cast<std::uint64_t>(out.windowBlockRows) == 0);
    if (out.referenceOk && sameRows && o.status == rowfold::Status::ok) {
      for (std::size_t t = 0; t < ref.size(); ++t) {
        const long double b = termValues(o.summary, out.intercept, t).estimate;
        const long double diff = std::fabs(b - ref[t]);
        const long double scale = std::fabs(ref[t]);
        const double d = static_cast<double>(scale > 0 ? diff / scale : diff);
        o.deviation.push_back(d);
        if (!(d <= o.maxDeviation)) o.maxDeviation = d;  // NaN propagates
      }
    } else {
      o.maxDeviation = std::numeric_limits<double>::quiet_NaN();
    }
    out.solvers.push_back(std::move(o));
  }
}

}  // namespace rowfold_compare
