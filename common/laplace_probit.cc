#include "common/laplace_probit.h"

#include "common/last_layer_curvature.h"
#include "common/last_layer_laplace.h"

namespace chorus {

StatusOr<MatrixD> LaplaceProbitPredictive(const Mlp& net, const BasinFit& fit, double scale,
                                          const ConstMatrixRef& x) {
  if (fit.method != BasinMethod::kLaplaceLastLayer) {
    return Status::InvalidInput("probit predictive: the member has no last-layer Laplace fit");
  }
  CHORUS_ASSIGN_OR_RETURN(const Matrix features, LastHiddenFeatures(net, fit.mean.data(), x));
  CHORUS_ASSIGN_OR_RETURN(LinearizedOutputs outputs, PredictLinearized(ToLastLayerLaplace(fit), features));
  return ProbitProbabilities(outputs.mean, scale * outputs.variance);
}

StatusOr<MatrixD> LaplaceProbitMixture(const Mlp& net, const std::vector<const BasinFit*>& fits,
                                       const std::vector<double>& weights, double scale,
                                       const ConstMatrixRef& x) {
  if (fits.empty() || fits.size() != weights.size()) {
    return Status::InvalidInput("probit mixture: " + std::to_string(fits.size()) + " fits for " +
                                std::to_string(weights.size()) + " weights");
  }
  MatrixD mixture;
  for (size_t m = 0; m < fits.size(); ++m) {
    CHORUS_ASSIGN_OR_RETURN(const MatrixD p, LaplaceProbitPredictive(net, *fits[m], scale, x));
    if (m == 0) mixture = MatrixD::Zero(p.rows(), p.cols());
    mixture += weights[m] * p;
  }
  return mixture;
}

}  // namespace chorus
