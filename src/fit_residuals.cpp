#include "heft/fit_residuals.hpp"

#include <ceres/ceres.h>

#include <algorithm>

namespace heft {

bool Pinned::contains(int i) const { return std::find(index.begin(), index.end(), i) != index.end(); }

namespace {

template <typename Functor>
void add_block(ceres::Problem& problem, const FitModel& m, const std::vector<double*>& blocks, Functor f) {
  const int nc = kFitCore + m.n_instruments(), nj = m.n_instruments();
  auto* cost = new ceres::DynamicAutoDiffCostFunction<Functor, kResidualStride>(new Functor(f));
  cost->AddParameterBlock(nc);
  if (nj > 0) cost->AddParameterBlock(nj);
  cost->SetNumResiduals(Functor::kSize);
  problem.AddResidualBlock(cost, nullptr, blocks);
}

}  // namespace

void add_residual_blocks(ceres::Problem& problem, const FitModel& m, const Pinned& pinned, Eigen::VectorXd& p) {
  const int nc = kFitCore + m.n_instruments(), nj = m.n_instruments();
  std::vector<double*> blocks = {p.data()};
  if (nj > 0) blocks.push_back(p.data() + nc);
  add_block(problem, m, blocks, AnomalyResidual{{&m, &pinned}});
  for (int k = 0; k < m.n_relative(); ++k) add_block(problem, m, blocks, RelativeResidual{{&m, &pinned}, k});
  for (int k = 0; k < m.n_rv(); ++k) add_block(problem, m, blocks, RvResidual{{&m, &pinned}, k});
  add_block(problem, m, blocks, PriorResidual{{&m, &pinned}});
  if (nj > 0) problem.SetParameterBlockConstant(p.data() + nc);
}

}  // namespace heft
