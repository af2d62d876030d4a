#include "e2e/e2e_helpers.h"

#include <gtest/gtest.h>

#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>

namespace prefsift::e2e {

std::string SourceDir() { return PREFSIFT_SOURCE_DIR; }

std::string ReadFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

std::vector<nlohmann::ordered_json> ReadJsonl(const std::string& path) {
  std::vector<nlohmann::ordered_json> out;
  std::ifstream in(path);
  std::string line;
  while (std::getline(in, line)) {
    if (!line.empty()) out.push_back(nlohmann::ordered_json::parse(line));
  }
  return out;
}

int Shell(const std::string& command, std::string* out) {
  std::FILE* p = popen((command + " 2>&1").c_str(), "r");
  if (!p) return -1;
  char buf[4096];
  std::string text;
  while (size_t n = std::fread(buf, 1, sizeof buf, p)) text.append(buf, n);
  int rc = pclose(p);
  if (out) *out = text;
  return WIFEXITED(rc) ? WEXITSTATUS(rc) : -1;
}

const std::string& DemoOutput() {
  static const std::string dir = [] {
    std::string d = ::testing::TempDir() + "prefsift-demo-" + std::to_string(::getpid());
    std::filesystem::remove_all(d);
    std::string log;
    int rc = Shell(std::string("SOURCE_DATE_EPOCH=1775000000 ") + PREFSIFT_BINARY + " run --plan " + SourceDir() +
                       "/samples/demo-plan.json --out " + d + " --overwrite",
                   &log);
    // Exit 4 (gate failed) still writes every output.
    EXPECT_TRUE(rc == 0 || rc == 4) << "demo run failed with exit " << rc << ":\n" << log;
    return d;
  }();
  return dir;
}

const nlohmann::ordered_json& DemoSummary() {
  static const nlohmann::ordered_json s = nlohmann::ordered_json::parse(ReadFile(DemoOutput() + "/summary.json"));
  return s;
}

const nlohmann::ordered_json& Truth() {
  static const nlohmann::ordered_json t = nlohmann::ordered_json::parse(ReadFile(SourceDir() + "/samples/truth.json"));
  return t;
}

const std::map<std::string, nlohmann::ordered_json>& DemoRejectsById() {
  static const std::map<std::string, nlohmann::ordered_json> m = [] {
    std::map<std::string, nlohmann::ordered_json> out;
    for (auto& j : ReadJsonl(DemoOutput() + "/rejects.jsonl")) {
      std::string key = j["id"].is_string() ? j["id"].get<std::string>()
                                            : j["input"].get<std::string>() + ":" + std::to_string(j["line"].get<int>());
      out[key] = j;
    }
    return out;
  }();
  return m;
}

}  // namespace prefsift::e2e
