// `prefsift cut`; see cut_command.h.
#include "cli/cut_command.h"

#include <CLI/CLI.hpp>

#include <cstdio>

#include "cli/exit_codes.h"
#include "core/plan.h"
#include "io/file_system.h"
#include "pipeline/cut.h"

namespace prefsift {
namespace {

class Command : public CutCommand {
 public:
  explicit Command(CLI::App* app) {
    cmd_ = app->add_subcommand("cut", "Cut the plan's inputs into parts at line starts, for observe jobs on many machines (docs/scale.md)");
    cmd_->add_option("-p,--plan", plan_path_, "Plan file (its inputs are cut)")->required();
    CLI::Option* parts = cmd_->add_option("--parts", opts_.parts,
                                          "Parts in total, shared by size among the plain inputs (a compressed input is one part)");
    CLI::Option* bytes = cmd_->add_option("--part-bytes", opts_.part_bytes,
                                          "Or: about this many bytes per part (suffix K, M or G for KiB, MiB, GiB)")
                             ->transform(CLI::AsSizeValue(false));
    parts->excludes(bytes);
    cmd_->add_option("-o,--out", out_, "The parts file to write, e.g. work/parts.json (its folder is created)")->required();
    cmd_->add_flag("--overwrite", overwrite_, "Replace an existing parts file that holds other parts");
    cmd_->add_flag("-q,--quiet", quiet_, "No table of parts on stderr");
    cmd_->footer("\nExample:\n  prefsift cut --plan samples/demo-plan.json --parts 4 --out work/parts.json\n");
  }

  int RunIfParsed() override {
    if (!cmd_->parsed()) return -1;
    if (opts_.parts == 0 && opts_.part_bytes == 0) {
      std::fprintf(stderr, "prefsift: cut: say how finely to cut: --parts N or --part-bytes SIZE\n");
      return kExitUsage;
    }
    auto plan = LoadPlanFile(DefaultFileSystem(), plan_path_);
    auto parts = plan.ok() ? CutPlanToFile(DefaultFileSystem(), plan.value(), opts_, out_, overwrite_)
                           : Result<std::vector<CutPart>>(plan.status());
    if (!parts.ok()) {
      std::fprintf(stderr, "prefsift: %s\n", parts.status().message().c_str());
      return ExitFor(parts.status());
    }
    if (!quiet_) {
      std::fprintf(stderr, "%5s %5s %14s %14s %12s %10s\n", "part", "input", "begin", "end", "first line", "lines");
      for (const CutPart& p : parts.value()) {
        if (p.end) {
          std::fprintf(stderr, "%5llu %5llu %14llu %14llu %12llu %10llu\n", static_cast<unsigned long long>(p.part),
                       static_cast<unsigned long long>(p.input), static_cast<unsigned long long>(p.begin),
                       static_cast<unsigned long long>(*p.end), static_cast<unsigned long long>(p.first_line),
                       static_cast<unsigned long long>(p.lines));
        } else {
          std::fprintf(stderr, "%5llu %5llu %14s %14s %12s %10s  (compressed: one whole part)\n",
                       static_cast<unsigned long long>(p.part), static_cast<unsigned long long>(p.input), "0", "end",
                       "1", "?");
        }
      }
      std::fprintf(stderr, "wrote %s (%zu parts)\n", out_.c_str(), parts.value().size());
    }
    return kExitOk;
  }

 private:
  CLI::App* cmd_;
  std::string plan_path_, out_;
  CutOptions opts_;
  bool overwrite_ = false, quiet_ = false;
};

}  // namespace

std::unique_ptr<CutCommand> AddCutCommand(CLI::App* app) { return std::make_unique<Command>(app); }

}  // namespace prefsift
