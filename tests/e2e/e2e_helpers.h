// Shared fixtures for end-to-end tests: one run of the whole pipeline over
// samples/demo-plan.json per test process, and the samples' ground truth.
#pragma once

#include <nlohmann/json.hpp>

#include <map>
#include <string>
#include <vector>

namespace prefsift::e2e {

std::string SourceDir();
// Output folder of the demo run (the `prefsift run --plan samples/demo-plan.json`
// command, in a temp folder). The run happens on first use.
const std::string& DemoOutput();
const nlohmann::ordered_json& DemoSummary();
const nlohmann::ordered_json& Truth();  // samples/truth.json
// rejects.jsonl of the demo run, by record id (records without a readable id
// are keyed "<input>:<line>").
const std::map<std::string, nlohmann::ordered_json>& DemoRejectsById();
std::vector<nlohmann::ordered_json> ReadJsonl(const std::string& path);
std::string ReadFile(const std::string& path);
// Runs a shell command, returns its exit code; output goes to *out if given.
int Shell(const std::string& command, std::string* out = nullptr);

}  // namespace prefsift::e2e
