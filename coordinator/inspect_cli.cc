// `chorus inspect BUNDLE`: verifies a bundle (magic, version, checksum, dimensions) and prints
// what is inside. Exit 0 with the summary on stdout; exit 2 with the reason on stderr if the
// bundle is corrupt or not a bundle.
#include <algorithm>
#include <cstdio>
#include <memory>
#include <string>

#include "coordinator/command.h"
#include "proto/bundle_codec.h"

namespace chorus {
namespace {

constexpr size_t kListedColumns = 20;
constexpr size_t kListedMembers = 50;
constexpr size_t kListedValues = 8;

std::string Format(const char* format, double value) {
  char text[64];
  std::snprintf(text, sizeof text, format, value);
  return text;
}

std::string Line(const std::string& label, const std::string& text) {
  std::string line = label;
  line.resize(std::max<size_t>(label.size() + 1, 14), ' ');
  return line + text + "\n";
}

std::string JoinSome(const std::vector<std::string>& values, size_t most) {
  std::string text;
  for (size_t i = 0; i < values.size() && i < most; ++i) text += (i ? ", " : "") + values[i];
  if (values.size() > most) text += ", ... (" + std::to_string(values.size()) + " in all)";
  return text;
}

std::string Columns(const Preprocessing& p) {
  std::string text;
  for (size_t i = 0; i < p.plan.columns.size() && i < kListedColumns; ++i) {
    const FeaturePlan::Column& c = p.plan.columns[i];
    const std::string kind =
        c.categorical
            ? "categorical: " + JoinSome(p.plan.categorical[c.index].vocabulary, kListedValues)
            : "numeric";
    text += Line("  " + c.name, kind);
  }
  if (p.plan.columns.size() > kListedColumns) {
    text += "  ... " + std::to_string(p.plan.columns.size() - kListedColumns) + " more columns\n";
  }
  return text;
}

std::string Members(const Bundle& b) {
  std::string text = "  member  seed                  weight      samples  fit\n";
  for (size_t m = 0; m < b.members.size() && m < kListedMembers; ++m) {
    const BundleMember& member = b.members[m];
    char row[160];
    std::snprintf(row, sizeof row, "  %-7d %-21llu %-11.6f %-8lld %s", member.index,
                  static_cast<unsigned long long>(member.seed), member.weight,
                  static_cast<long long>(member.Samples()), BasinMethodName(member.basin.method));
    text += row;
    if (member.basin.method == BasinMethod::kGaussianLowRank) {
      text += " (rank " + std::to_string(member.basin.deviations.rows()) + ")";
    }
    text += "\n";
  }
  if (b.members.size() > kListedMembers) {
    text += "  ... " + std::to_string(b.members.size() - kListedMembers) + " more members\n";
  }
  return text;
}

std::string Architecture(const Bundle& b) {
  std::string text;
  if (!b.conv.empty()) {
    text = "image " + std::to_string(b.image.channels) + "x" + std::to_string(b.image.height) + "x" +
           std::to_string(b.image.width) + ", conv";
    for (const ConvStage& s : b.conv) {
      text += " " + std::to_string(s.channels) + "@" + std::to_string(s.kernel) + "x" +
              std::to_string(s.kernel) + (s.pool == Pooling::kNone ? "" : std::string("/") + PoolingName(s.pool));
    }
    text += ", dense ";
  }
  std::string widths;
  for (int w : b.widths) widths += (widths.empty() ? "" : "-") + std::to_string(w);
  return text + widths + ", " + ActivationName(b.activation) + ", " +
         std::to_string(BundleParameterCount(b)) + " parameters per network";
}

std::string Summary(const std::string& path, const BundleFile& file) {
  const Bundle& b = file.bundle;
  const Preprocessing& p = b.preprocessing;
  int64_t samples = 0;
  for (const BundleMember& m : b.members) samples += m.Samples();
  std::string metrics;
  for (const auto& [name, value] : b.test_metrics) {
    metrics += (metrics.empty() ? "" : ", ") + name + " " + Format("%.6g", value);
  }
  const std::string target = p.format == "csv" ? ", target \"" + p.target + "\"" : "";
  return Line("bundle", path) +
         Line("format", "version " + std::to_string(file.format_version) + ", " +
                            std::to_string(file.payload_bytes) + "-byte payload") +
         Line("checksum", "OK (SHA-256 " + file.payload_sha256 + ")") +
         Line("run", b.run_name + " (chorus " + b.chorus_version + ")") +
         Line("task", std::string(TaskName(b.task)) +
                          (b.task == Task::kClassification
                               ? ", " + std::to_string(b.class_names.size()) +
                                     " classes: " + JoinSome(b.class_names, kListedColumns)
                               : "")) +
         Line("inputs", p.format + target + "; " + std::to_string(p.plan.columns.size()) +
                            " columns -> " + std::to_string(p.plan.Features()) + " features") +
         Columns(p) + Line("architecture", Architecture(b)) +
         Line("members", std::to_string(b.members.size()) + ", " + std::to_string(samples) +
                             " samples in all, basin scale " + Format("%g", b.basin_scale)) +
         Members(b) + Line("temperature", Format("%.6g", b.temperature)) +
         Line("test metrics", metrics.empty() ? "(none)" : metrics) +
         Line("data hash", b.data_hash) + Line("config hash", b.config_hash);
}

int Inspect(const std::string& path) {
  const StatusOr<BundleFile> file = ReadBundleFile(path);
  if (!file.ok()) {
    std::fprintf(stderr, "chorus inspect: %s\n", file.status().ToString().c_str());
    return file.status().ExitCode();
  }
  std::fputs(Summary(path, file.value()).c_str(), stdout);
  return 0;
}

}  // namespace

void RegisterInspectCommand(CLI::App& app, CommandRunner* runner) {
  auto path = std::make_shared<std::string>();
  CLI::App* cmd = app.add_subcommand(
      "inspect",
      "Verify BUNDLE (magic bytes, format version, SHA-256 checksum, dimensions) and print\n"
      "what is inside: task, classes, input columns, architecture, members, samples, weights,\n"
      "temperature, the run's test metrics, data and config hashes. Exit 2 if it is corrupt.");
  cmd->add_option("BUNDLE", *path, "bundle file (bundle.chorus of a run)")->required();
  cmd->callback([runner, path] { *runner = [path] { return Inspect(*path); }; });
}

}  // namespace chorus
