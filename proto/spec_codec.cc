#include "proto/spec_codec.h"

#include <memory>
#include <vector>

#include "common/conv_front.h"

namespace chorus {

void SpecToWire(const MemberSpec& spec, wire::MemberSpec* out) {
  out->set_index(spec.index);
  out->set_seed(spec.seed);
  out->mutable_hidden()->Add(spec.model.hidden.begin(), spec.model.hidden.end());
  out->set_activation(ActivationName(spec.model.activation));
  if (!spec.model.conv.empty()) {
    const ImageShape& i = spec.model.image;
    for (int v : {i.channels, i.height, i.width}) out->add_image(v);
    for (const ConvStage& st : spec.model.conv) {
      wire::ConvStage* c = out->add_conv();
      c->set_channels(st.channels);
      c->set_kernel(st.kernel);
      c->set_pool(PoolingName(st.pool));
    }
  }
  const TrainConfig& t = spec.train;
  out->set_epochs(t.epochs);
  out->set_batch_size(t.batch_size);
  out->set_parts(t.parts);
  out->set_products(ProductPrecisionName(t.products));
  out->set_lr(t.optimizer.lr);
  out->set_momentum(t.optimizer.momentum);
  out->set_nesterov(t.optimizer.nesterov);
  out->set_weight_decay(t.optimizer.weight_decay);
  out->set_clip_norm(t.optimizer.clip_norm);
  out->set_schedule(ScheduleName(t.schedule.kind));
  out->set_step_every_epochs(t.schedule.step_every_epochs);
  out->set_step_factor(t.schedule.step_factor);
  const BasinConfig& b = spec.basin;
  out->set_basin_method(BasinMethodName(b.method));
  out->set_basin_epochs(b.epochs);
  out->set_basin_lr(b.lr);
  out->set_basin_snapshots(b.snapshots);
  out->set_basin_rank(b.rank);
  out->set_basin_samples(b.samples);
  out->set_basin_scale(b.scale);
  out->set_basin_hessian(LaplaceHessianName(b.hessian));
  out->set_basin_prior_precision(b.prior_precision);
  out->set_sgmcmc_sampler(SgmcmcSamplerName(b.sgmcmc.sampler));
  out->set_sgmcmc_cycles(b.sgmcmc.cycles);
  out->set_sgmcmc_exploration(b.sgmcmc.exploration_fraction);
  out->set_sgmcmc_samples_per_cycle(b.sgmcmc.samples_per_cycle);
  out->set_sgmcmc_temperature(b.sgmcmc.temperature);
  out->set_sgmcmc_friction(b.sgmcmc.friction);
  out->set_early_stopping(t.early_stopping.mode == Switch::kOn);
  out->set_patience(t.early_stopping.patience);
  out->set_beta_nll(t.beta_nll);
  out->set_role(JobRoleName(spec.role));
  out->set_point(spec.point);
  out->set_fold(spec.fold);
  out->set_folds(spec.folds);
  out->set_fold_seed(spec.fold_seed);
  out->set_stop_epoch(spec.stop_epoch);
  const auto& points = t.start_points;
  if (!points.empty()) {
    const std::vector<float>& start = *points[static_cast<size_t>(spec.index) % points.size()];
    out->mutable_start_parameters()->Add(start.begin(), start.end());
  }
}

StatusOr<MemberSpec> SpecFromWire(const wire::MemberSpec& w) {
  const auto activation = ParseActivation(w.activation());
  const auto schedule = ParseSchedule(w.schedule());
  const auto basin = ParseBasinMethod(w.basin_method());
  const auto role = ParseJobRole(w.role());
  const auto hessian = ParseLaplaceHessian(w.basin_hessian());
  const auto sampler = ParseSgmcmcSampler(w.sgmcmc_sampler());
  const auto products = w.products().empty() ? ProductPrecision::kFp32 : ParseProductPrecision(w.products());
  if (!activation || !schedule || !basin || !role || !hessian || !sampler || !products) {
    return Status::InvalidInput(
        "job spec: unknown activation, schedule, basin method, hessian, sampler, products or role");
  }
  const bool sizes_ok = w.epochs() >= 1 && w.batch_size() >= 1 && w.parts() >= 1 &&
                        w.parts() <= w.batch_size() && w.lr() > 0 && w.hidden_size() <= 64 &&
                        w.step_every_epochs() >= 1 && w.basin_snapshots() >= 2 &&
                        w.basin_rank() >= 2 && w.basin_rank() <= w.basin_snapshots() &&
                        w.basin_samples() >= 1 && w.basin_epochs() >= 1 && w.basin_lr() > 0 &&
                        w.patience() >= 1 && w.beta_nll() >= 0 && w.beta_nll() <= 1 &&
                        w.fold() >= -1 && (w.fold() < 0 || (w.folds() >= 2 && w.fold() < w.folds())) &&
                        w.stop_epoch() >= 0 && w.point() >= 0 && w.basin_prior_precision() >= 0 &&
                        w.basin_prior_precision() <= 1e12;
  if (!sizes_ok) return Status::InvalidInput("job spec: a value is out of range");
  MemberSpec s;
  s.index = w.index();
  s.seed = w.seed();
  s.model.hidden.assign(w.hidden().begin(), w.hidden().end());
  for (int h : s.model.hidden) {
    if (h < 1 || h > 65536) return Status::InvalidInput("job spec: hidden width out of range");
  }
  s.model.activation = *activation;
  if (w.conv_size() > 0 || w.image_size() > 0) {
    if (w.image_size() != 3) return Status::InvalidInput("job spec: expected an image shape of 3 values");
    s.model.image = {w.image(0), w.image(1), w.image(2)};
    for (const wire::ConvStage& c : w.conv()) {
      const auto pool = ParsePooling(c.pool());
      if (!pool) return Status::InvalidInput("job spec: unknown pooling \"" + c.pool() + "\"");
      s.model.conv.push_back({c.channels(), c.kernel(), *pool});
    }
    const std::string problem = CheckConvStages(s.model.image, s.model.conv);
    if (!problem.empty()) return Status::InvalidInput("job spec: convolution stages: " + problem);
  }
  s.train.epochs = w.epochs();
  s.train.batch_size = w.batch_size();
  s.train.parts = w.parts();
  s.train.products = *products;
  s.train.optimizer = {w.lr(), w.momentum(), w.nesterov(), w.weight_decay(), w.clip_norm()};
  s.train.schedule = {*schedule, w.step_every_epochs(), w.step_factor()};
  s.basin = {*basin, w.basin_epochs(), w.basin_lr(), w.basin_snapshots(), w.basin_rank(),
             w.basin_samples(), w.basin_scale()};
  s.basin.hessian = *hessian;
  s.basin.prior_precision = w.basin_prior_precision();
  s.basin.sgmcmc = {*sampler, w.sgmcmc_cycles(), w.sgmcmc_exploration(), w.sgmcmc_samples_per_cycle(),
                    w.sgmcmc_temperature(), w.sgmcmc_friction()};
  if (Status st = ValidateSgmcmcConfig(s.basin.sgmcmc); !st.ok()) return st.WithContext("job spec");
  s.train.early_stopping = {w.early_stopping() ? Switch::kOn : Switch::kOff, w.patience()};
  s.train.beta_nll = w.beta_nll();
  s.role = *role;
  s.point = w.point();
  s.fold = w.fold();
  s.folds = w.folds();
  s.fold_seed = w.fold_seed();
  s.stop_epoch = w.stop_epoch();
  if (w.start_parameters_size() > 0) {
    // The member's own row only: start_points[index mod 1] is it.
    s.train.start_points.push_back(std::make_shared<const std::vector<float>>(
        w.start_parameters().begin(), w.start_parameters().end()));
  }
  return s;
}

}  // namespace chorus
