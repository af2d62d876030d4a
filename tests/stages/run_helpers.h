// Helpers for tests that run the pipeline on small files in a temp folder.
#pragma once

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "io/memory_file_system.h"
#include "pipeline/pipeline.h"

namespace prefsift::testing {

// Per-process names: ctest runs every test as its own process, in parallel, and
// two tests of one file may use the same name (e.g. the same input file).
inline std::string TempPath(const std::string& name) {
  return ::testing::TempDir() + "prefsift" + std::to_string(::getpid()) + "_" + name;
}

inline std::string WriteFile(const std::string& name, const std::string& bytes) {
  std::string path = TempPath(name);
  std::ofstream(path, std::ios::binary) << bytes;
  return path;
}

inline std::string ReadFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

inline std::vector<nlohmann::ordered_json> ReadJsonl(const std::string& path) {
  std::vector<nlohmann::ordered_json> out;
  std::ifstream in(path);
  std::string line;
  while (std::getline(in, line)) {
    if (!line.empty()) out.push_back(nlohmann::ordered_json::parse(line));
  }
  return out;
}

// The same on files held in memory (io/memory_file_system.h), for tests whose
// stages read nothing but their inputs: the run goes through `fs` too
// (RunPipeline(plan, options, fs, log)) and leaves no files behind.
inline MemoryFileSystem& MemoryFiles() {
  static MemoryFileSystem fs;
  return fs;
}

inline std::string WriteFile(MemoryFileSystem* fs, const std::string& name, const std::string& bytes) {
  std::string path = TempPath(name);
  fs->Put(path, bytes);
  return path;
}

inline std::string ReadFile(FileSystem* fs, const std::string& path) {
  auto r = ReadWholeFile(fs, path);
  EXPECT_TRUE(r.ok()) << r.status().message();
  return r.ok() ? r.value() : std::string();
}

inline std::vector<nlohmann::ordered_json> ReadJsonl(FileSystem* fs, const std::string& path) {
  std::vector<nlohmann::ordered_json> out;
  std::istringstream in(ReadFile(fs, path));
  std::string line;
  while (std::getline(in, line)) {
    if (!line.empty()) out.push_back(nlohmann::ordered_json::parse(line));
  }
  return out;
}

inline Plan PlanFor(const std::vector<std::string>& inputs, const nlohmann::ordered_json& layout, const std::string& out) {
  Plan plan;
  for (const auto& in : inputs) {
    Status s = AddInput(&plan, in, layout, "test");
    EXPECT_TRUE(s.ok()) << s.message();
  }
  plan.output = out;
  plan.overwrite = true;
  return plan;
}

}  // namespace prefsift::testing
