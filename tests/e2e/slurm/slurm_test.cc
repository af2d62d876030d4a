// The pipeline as Slurm jobs on a real single-node cluster (docs/scale.md):
// scripts/slurm/start-cluster.sh starts munged, slurmctld and slurmd in a
// temporary folder; a trivial job, a job array and a dependent job prove the
// cluster works; then scripts/slurm/prefsift-slurm.sh runs the demo plan cut
// into 5 parts (cut, an observe array, decide after it, an apply array,
// collect) and the collected outputs must equal `prefsift run` on the same
// plan: every split file and rejects.jsonl byte for byte, the summary's
// figures, and the gate verdict (the exit code). The cluster is stopped and
// its folder removed at the end, also when a check fails.
//
// Skipped (GTEST_SKIP, with the reason) when the daemons cannot start here:
// not root, munge or slurm-wlm not installed, a daemon that does not come up.
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include <unistd.h>

#include <chrono>
#include <filesystem>
#include <fstream>
#include <map>
#include <set>
#include <sstream>
#include <thread>

#include "e2e/e2e_helpers.h"

namespace prefsift::e2e {
namespace {

namespace fs = std::filesystem;
using Json = nlohmann::ordered_json;

// Whole-test budget for the jobs (the cluster starts in about 6 s, the demo
// plan's jobs take about 20 s on a 2-CPU machine).
constexpr int kJobSeconds = 150;

std::string Quote(const std::string& s) {
  std::string q = "'";
  for (char c : s) q += c == '\'' ? std::string("'\\''") : std::string(1, c);
  return q + "'";
}

// A started cluster; stopped (and its folder removed) when it goes out of scope.
class Cluster {
 public:
  ~Cluster() { Stop(); }
  // "" on success, else why the cluster cannot run here (start-cluster.sh exit 3),
  // or "!" + the error for any other failure.
  std::string Start() {
    dir_ = ::testing::TempDir() + "prefsift-slurm-" + std::to_string(::getpid());
    fs::remove_all(dir_);
    std::string log;
    // The owner pid: if this process dies without stopping the cluster, a watcher stops it.
    int rc = Shell("PREFSIFT_CLUSTER_OWNER=" + std::to_string(::getpid()) + " " +
                       Quote(SourceDir() + "/scripts/slurm/start-cluster.sh") + " " + Quote(dir_),
                   &log);
    if (rc == 0) {
      started_ = true;
      return "";
    }
    fs::remove_all(dir_);
    return (rc == 3 ? "" : "!") + log;
  }
  void Stop() {
    if (!started_) return;
    started_ = false;
    std::string log;
    int rc = Shell(Quote(SourceDir() + "/scripts/slurm/stop-cluster.sh") + " " + Quote(dir_), &log);
    EXPECT_EQ(rc, 0) << "stop-cluster.sh: " << log;
  }
  // A shell command prefix that talks to this cluster.
  std::string Env() const { return "SLURM_CONF=" + Quote(dir_ + "/slurm.conf") + " "; }
  // The end of the daemons' logs, for a failure message.
  std::string Logs() const {
    std::string text;
    for (const char* name : {"slurmctld.log", "slurmd.log"}) {
      std::string tail;
      Shell("tail -n 20 " + Quote(dir_ + "/log/" + name), &tail);
      text += std::string("--- ") + name + "\n" + tail;
    }
    return text;
  }
  // The job's state (COMPLETED, FAILED, PENDING, ...), "" if unknown.
  std::string JobState(const std::string& id) const {
    std::string out;
    if (Shell(Env() + "scontrol show job -o " + id, &out) != 0) return "";
    // An array job prints one line per task; any failure wins, then any unfinished one.
    std::set<std::string> states;
    std::istringstream in(out);
    std::string line;
    while (std::getline(in, line)) {
      size_t at = line.find("JobState=");
      if (at == std::string::npos) continue;
      states.insert(line.substr(at + 9, line.find(' ', at) - at - 9));
    }
    for (const char* bad : {"FAILED", "CANCELLED", "TIMEOUT", "NODE_FAIL", "OUT_OF_MEMORY", "BOOT_FAIL", "DEADLINE"}) {
      if (states.count(bad)) return bad;
    }
    for (const auto& s : states) {
      if (s != "COMPLETED") return s;
    }
    return states.empty() ? "" : "COMPLETED";
  }
  // Waits until every job is finished; returns "" when all completed, else
  // which one did not (and why).
  std::string Wait(const std::vector<std::string>& ids, int seconds) const {
    auto until = std::chrono::steady_clock::now() + std::chrono::seconds(seconds);
    for (;;) {
      bool all_done = true;
      for (const auto& id : ids) {
        std::string s = JobState(id);
        if (s == "COMPLETED") continue;
        if (s == "FAILED" || s == "CANCELLED" || s == "TIMEOUT" || s == "NODE_FAIL" || s == "OUT_OF_MEMORY" ||
            s == "BOOT_FAIL" || s == "DEADLINE") {
          return "job " + id + " ended " + s;
        }
        all_done = false;
      }
      if (all_done) return "";
      if (std::chrono::steady_clock::now() > until) {
        std::string q;
        Shell(Env() + "squeue -a", &q);
        return "jobs not finished after " + std::to_string(seconds) + " s:\n" + q;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(500));
    }
  }
  const std::string& dir() const { return dir_; }

 private:
  std::string dir_;
  bool started_ = false;
};

// Why the cluster cannot run here, checked before starting anything.
std::string CannotRunHere() {
  if (::geteuid() != 0) return "the daemons (munged, slurmctld, slurmd) need root; running as uid " + std::to_string(::geteuid());
  for (const char* tool : {"munged", "slurmctld", "slurmd", "sbatch", "scontrol"}) {
    if (Shell(std::string("command -v ") + tool) != 0) {
      return std::string(tool) + " is not installed (scripts/install-deps.sh installs munge and slurm-wlm)";
    }
  }
  return "";
}

// The job id in "observe=12 decide=13 ..." for `step` ("-" when not submitted).
std::string JobId(const std::string& line, const std::string& step) {
  size_t at = line.find(step + "=");
  if (at == std::string::npos) return "";
  at += step.size() + 1;
  return line.substr(at, line.find_first_of(" \n", at) - at);
}

// summary.json without what differs by design (docs/cli.md, "Observe,
// decide, apply"): the provenance's list of output files with their SHA-256
// (decide lists its own folder; the split files come later from apply and are
// compared byte for byte instead) and its note that the run was decided from
// parts.
Json Figures(const std::string& path) {
  Json j = Json::parse(ReadFile(path));
  if (j.contains("provenance")) {
    for (const char* k : {"outputs", "outputs_note", "parts"}) j["provenance"].erase(k);
  }
  return j;
}

// The first few differences between two JSON values, as JSON Patch operations (RFC 6902).
std::string Differences(const Json& a, const Json& b) {
  Json patch = Json::diff(a, b);
  std::string text;
  for (size_t i = 0; i < patch.size() && i < 5; ++i) text += patch[i].dump().substr(0, 300) + "\n";
  return text;
}

TEST(SlurmCluster, JobScriptMatchesOneMachineRun) {
  if (std::string why = CannotRunHere(); !why.empty()) GTEST_SKIP() << "no Slurm cluster on this machine: " << why;
  Cluster cluster;
  std::string why = cluster.Start();
  if (!why.empty() && why[0] != '!') GTEST_SKIP() << "the Slurm daemons cannot start on this machine: " << why;
  ASSERT_TRUE(why.empty()) << "start-cluster.sh failed: " << why.substr(1);

  // 1. The cluster runs a job, a job array and a job that waits for the array.
  std::string share = cluster.dir() + "/share";
  fs::create_directories(share);
  std::string ids;
  ASSERT_EQ(Shell(cluster.Env() + "sh -c " +
                      Quote("cd " + Quote(share) + " && a=$(sbatch --parsable --array=0-3 --mem=100M --wrap " +
                            Quote("echo task $SLURM_ARRAY_TASK_ID > t$SLURM_ARRAY_TASK_ID.txt") +
                            ") && b=$(sbatch --parsable --mem=100M --dependency=afterok:$a --wrap " +
                            Quote("cat t0.txt t1.txt t2.txt t3.txt > all.txt") + ") && echo $a $b"),
                  &ids),
            0)
      << ids;
  std::istringstream in(ids);
  std::string array_id, after_id;
  in >> array_id >> after_id;
  std::string waited = cluster.Wait({array_id, after_id}, 30);
  ASSERT_EQ(waited, "") << cluster.Logs();
  EXPECT_EQ(ReadFile(share + "/all.txt"), "task 0\ntask 1\ntask 2\ntask 3\n");

  // 2. The demo plan as jobs, unless the commands are not there yet.
  std::string help;
  if (Shell(std::string(PREFSIFT_BINARY) + " observe --help", &help) != 0) {
    GTEST_SKIP() << "the cluster works (job array and dependency checked), but this prefsift has no observe / "
                    "decide / apply commands yet, so the job script was not run";
  }
  std::string plan = SourceDir() + "/samples/demo-plan.json";
  std::string work = cluster.dir() + "/work";
  std::string submitted;
  int rc = Shell("SOURCE_DATE_EPOCH=1775000000 " + cluster.Env() + Quote(SourceDir() + "/scripts/slurm/prefsift-slurm.sh") +
                     " --plan " + Quote(plan) + " --work " + Quote(work) + " --parts 5 --threads 1" +
                     " --observe-mem 1G --decide-mem 2G --apply-mem 1G --prefsift " + Quote(PREFSIFT_BINARY),
                 &submitted);
  ASSERT_EQ(rc, 0) << submitted;
  std::vector<std::string> jobs;
  for (const char* step : {"observe", "decide", "apply", "collect"}) {
    std::string id = JobId(submitted, step);
    ASSERT_FALSE(id.empty() || id == "-") << step << " was not submitted: " << submitted;
    jobs.push_back(id);
  }
  std::string waited_all = cluster.Wait(jobs, kJobSeconds);
  if (!waited_all.empty()) {
    std::string logs;
    Shell("tail -n 20 " + Quote(work) + "/logs/*.out", &logs);
    FAIL() << waited_all << "\n" << logs << cluster.Logs();
  }

  // The one-machine run of the same plan.
  std::string ref = cluster.dir() + "/one-machine";
  std::string log;
  int run_rc = Shell("SOURCE_DATE_EPOCH=1775000000 " + std::string(PREFSIFT_BINARY) + " run --plan " + Quote(plan) +
                         " --threads 1 -q --out " + Quote(ref),
                     &log);
  ASSERT_TRUE(run_rc == 0 || run_rc == 4) << log;

  // The gate verdict: decide's exit code equals run's.
  EXPECT_EQ(ReadFile(work + "/verdict"), std::to_string(run_rc) + "\n");
  // Every record file of the one-machine run, byte for byte, in part order.
  size_t compared = 0;
  for (const auto& e : fs::directory_iterator(ref)) {
    std::string name = e.path().filename().string();
    if (e.path().extension() != ".jsonl") continue;
    ASSERT_TRUE(fs::exists(work + "/out/" + name)) << name << " is missing from the cluster's outputs";
    EXPECT_TRUE(ReadFile(work + "/out/" + name) == ReadFile(e.path().string())) << name << " differs";
    ++compared;
  }
  EXPECT_GE(compared, 4u);  // train, valid, test, rejects at least
  // The summary's figures.
  Json cluster_summary = Figures(work + "/out/summary.json"), one_summary = Figures(ref + "/summary.json");
  EXPECT_TRUE(cluster_summary == one_summary) << Differences(one_summary, cluster_summary);
  // The figures are really there (not two empty objects).
  EXPECT_EQ(cluster_summary["ledger"]["records_in"], 3900);
  EXPECT_EQ(cluster_summary["gate"]["verdict"], one_summary["gate"]["verdict"]);

  // A task re-run alone gives the same bytes: one observe task and one apply
  // task, their outputs removed first (as after a failure), run again by hand.
  std::string state = work + "/states/part-000002.state";
  std::string state_before = ReadFile(state);
  ASSERT_FALSE(state_before.empty());
  fs::remove(state);
  std::string apply_dir = work + "/apply/part-000003";
  std::map<std::string, std::string> apply_before;
  for (const auto& e : fs::directory_iterator(apply_dir)) apply_before[e.path().filename()] = ReadFile(e.path());
  fs::remove_all(apply_dir);
  std::string rerun;
  ASSERT_EQ(Shell("SOURCE_DATE_EPOCH=1775000000 " + cluster.Env() + "sh -c " +
                      Quote("sbatch --wait --quiet --array=2 --mem=1G --output=/dev/null " + Quote(work + "/jobs/observe.sh") +
                            " && sbatch --wait --quiet --array=3 --mem=1G --output=/dev/null " +
                            Quote(work + "/jobs/apply.sh")),
                  &rerun),
            0)
      << rerun;
  EXPECT_TRUE(ReadFile(state) == state_before) << "observe part 2 re-run gave other bytes";
  std::map<std::string, std::string> apply_after;
  for (const auto& e : fs::directory_iterator(apply_dir)) apply_after[e.path().filename()] = ReadFile(e.path());
  EXPECT_TRUE(apply_after == apply_before) << "apply part 3 re-run gave other files";
  // No temporary file is left behind in the shared folder.
  for (const auto& e : fs::recursive_directory_iterator(work)) {
    EXPECT_EQ(e.path().filename().string().find(".tmp-"), std::string::npos) << e.path();
  }

  // Submitting again finds every output in place and runs nothing.
  std::string again;
  ASSERT_EQ(Shell(cluster.Env() + Quote(SourceDir() + "/scripts/slurm/prefsift-slurm.sh") + " --plan " + Quote(plan) +
                      " --work " + Quote(work) + " --parts 5 --prefsift " + Quote(PREFSIFT_BINARY),
                  &again),
            0)
      << again;
  EXPECT_NE(again.find("observe=- decide=- apply=- collect=-"), std::string::npos) << again;

  // 3. A growing store fed from parts (issue 20, item 5): the samples' second
  // half added by the job script with --store equals `prefsift add` of the
  // whole half on a copy of the same store (history and every record file).
  const std::string sd = cluster.dir() + "/store";
  fs::create_directories(sd);
  std::string lines = ReadFile(SourceDir() + "/samples/comparisons.jsonl");
  size_t half = 0;
  for (int k = 0; k < 1500; ++k) half = lines.find('\n', half) + 1;
  std::ofstream(sd + "/b1.jsonl") << lines.substr(0, half);
  std::ofstream(sd + "/b2.jsonl") << lines.substr(half);
  std::string store_plan = ReadFile(SourceDir() + "/samples/store-plan.json");
  for (int b = 1; b <= 2; ++b) {
    std::string p = store_plan;
    p.replace(p.find("\"comparisons.jsonl\""), 19, "\"" + sd + "/b" + std::to_string(b) + ".jsonl\"");
    std::ofstream(sd + "/p" + std::to_string(b) + ".json") << p;
  }
  const std::string env = "SOURCE_DATE_EPOCH=1775000000 ";
  const std::string bin = std::string(PREFSIFT_BINARY);
  std::string out;
  ASSERT_EQ(Shell(env + bin + " add -q --plan " + Quote(sd + "/p1.json") + " --store " + Quote(sd + "/one.db") +
                      " --out " + Quote(sd + "/o1"), &out), 0) << out;
  fs::copy_file(sd + "/one.db", sd + "/cluster.db");
  ASSERT_EQ(Shell(env + bin + " add -q --plan " + Quote(sd + "/p2.json") + " --store " + Quote(sd + "/one.db") +
                      " --out " + Quote(sd + "/o2"), &out), 0) << out;
  std::string submitted2;
  ASSERT_EQ(Shell(env + cluster.Env() + Quote(SourceDir() + "/scripts/slurm/prefsift-slurm.sh") + " --plan " +
                      Quote(sd + "/p2.json") + " --work " + Quote(sd + "/work") + " --parts 3 --threads 1" +
                      " --store " + Quote(sd + "/cluster.db") + " --observe-mem 1G --decide-mem 2G --apply-mem 1G" +
                      " --prefsift " + Quote(PREFSIFT_BINARY), &submitted2), 0) << submitted2;
  std::vector<std::string> jobs2;
  for (const char* step : {"observe", "decide", "apply", "collect"}) jobs2.push_back(JobId(submitted2, step));
  std::string waited2 = cluster.Wait(jobs2, kJobSeconds);
  if (!waited2.empty()) {
    std::string logs;
    Shell("tail -n 20 " + Quote(sd + "/work") + "/logs/*.out", &logs);
    FAIL() << waited2 << "\n" << logs << cluster.Logs();
  }
  EXPECT_EQ(ReadFile(sd + "/work/verdict"), "0\n");
  std::string h1, h2;
  ASSERT_EQ(Shell(bin + " history --store " + Quote(sd + "/one.db"), &h1), 0);
  ASSERT_EQ(Shell(bin + " history --store " + Quote(sd + "/cluster.db"), &h2), 0);
  EXPECT_EQ(h1, h2);
  EXPECT_NE(h2.find("\n    2  "), std::string::npos) << h2;  // the second batch is in
  size_t files = 0;
  for (const auto& e : fs::directory_iterator(sd + "/o2")) {
    if (e.path().extension() != ".jsonl") continue;
    EXPECT_TRUE(ReadFile(sd + "/work/out/" + e.path().filename().string()) == ReadFile(e.path().string()))
        << e.path().filename() << " differs";
    ++files;
  }
  EXPECT_GE(files, 5u);  // the splits, rejects and store_conflicts.jsonl at least
}

}  // namespace
}  // namespace prefsift::e2e
