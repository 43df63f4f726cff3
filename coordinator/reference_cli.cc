// `chorus reference RUN_DIR`: the HMC reference comparison (coordinator/reference_command.h).
#include <memory>

#include "coordinator/command.h"
#include "coordinator/reference_command.h"

namespace chorus {

void RegisterReferenceCommand(CLI::App& app, CommandRunner* runner) {
  auto o = std::make_shared<ReferenceOptions>();
  CLI::App* cmd = app.add_subcommand(
      "reference",
      "For a small classification run: sample the posterior of the run's network on its training\n"
      "rows with full-batch HMC, and show how close the run's ensemble, its members' trained\n"
      "points and one member come to that reference on the test rows (top-1 agreement, total\n"
      "variation, test NLL, accuracy), with R-hat and ESS of the chains. Writes\n"
      "RUN_DIR/hmc_reference.json. Minutes for a few thousand parameters on a few thousand rows.");
  cmd->add_option("RUN_DIR", o->run_dir, "a finished run directory")->required();
  cmd->add_option("--chains", o->chains, "chains; chain c starts at member c mod M's point (its trained weights, or its Gaussian basin fit's mean)")
      ->capture_default_str()->check(CLI::Range(1, 64));
  cmd->add_option("--warmup", o->warmup, "warm-up iterations per chain (step-size tuning)")
      ->capture_default_str()->check(CLI::Range(0, 1000000));
  cmd->add_option("--draws", o->draws, "iterations kept per chain, before thinning")
      ->capture_default_str()->check(CLI::Range(4, 1000000));
  cmd->add_option("--thinning", o->thinning, "keep every N-th draw")->capture_default_str()->check(CLI::Range(1, 10000));
  cmd->add_option("--prior-variance", o->prior_variance,
                  "variance of the Gaussian prior on every weight (default: 1 / (training rows x weight decay))")
      ->check(CLI::PositiveNumber);
  cmd->add_option("--trajectory", o->trajectory_length,
                  "leapfrog time per iteration (default: pi / 2 prior standard deviations)")
      ->check(CLI::PositiveNumber);
  cmd->add_option("--seed", o->seed, "seed of the chains' momenta and acceptances")->capture_default_str();
  cmd->add_option("--threads", o->threads, "chains sampled at once (0 = all cores)")->capture_default_str()->check(CLI::NonNegativeNumber);
  cmd->add_option("--max-parameters", o->max_parameters, "refuse larger networks")->capture_default_str()->check(CLI::PositiveNumber);
  cmd->callback([runner, o] { *runner = [o] { return ReferenceCommand(*o); }; });
}

}  // namespace chorus
