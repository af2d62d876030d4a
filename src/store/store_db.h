// StoreDb: the SQLite file behind a growing store (docs/store.md), its schema,
// and a small prepared-statement wrapper.
//
// One StoreDb is one connection; use it from one thread. Several processes may
// open the same file: writers serialise on BEGIN IMMEDIATE and wait up to the
// busy timeout, then fail with an input error naming the store.
#pragma once

#include <sqlite3.h>

#include <cstdint>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "core/status.h"

namespace prefsift::store {

class Statement {
 public:
  Statement(sqlite3* db, sqlite3_stmt* s) : db_(db), s_(s) {}
  Statement(const Statement&) = delete;
  Statement& operator=(const Statement&) = delete;
  ~Statement() { sqlite3_finalize(s_); }
  // Binds by 1-based index; returns *this for chaining.
  Statement& Bind(int i, int64_t v) { sqlite3_bind_int64(s_, i, v); return *this; }
  Statement& Bind(int i, std::string_view text) {
    sqlite3_bind_text(s_, i, text.data(), static_cast<int>(text.size()), SQLITE_TRANSIENT);
    return *this;
  }
  Statement& BindBlob(int i, const void* p, size_t n) {
    sqlite3_bind_blob(s_, i, p, static_cast<int>(n), SQLITE_TRANSIENT);
    return *this;
  }
  Statement& BindNull(int i) { sqlite3_bind_null(s_, i); return *this; }
  // Steps once: true when a row is ready, false when done; *error on failure.
  bool Step(Status* error);
  // Runs to completion (for writes); resets so the statement can be reused.
  Status Run();
  void Reset() { sqlite3_reset(s_); sqlite3_clear_bindings(s_); }
  int64_t Int(int col) const { return sqlite3_column_int64(s_, col); }
  bool IsNull(int col) const { return sqlite3_column_type(s_, col) == SQLITE_NULL; }
  std::string Text(int col) const;
  std::string_view Blob(int col) const;

 private:
  sqlite3* db_;
  sqlite3_stmt* s_;
};

class StoreDb {
 public:
  // Opens (creating when `create`) the store at `path` and its schema.
  // busy_timeout_ms: how long a writer waits for another one.
  static Result<std::unique_ptr<StoreDb>> Open(const std::string& path, int busy_timeout_ms, bool create);
  ~StoreDb();

  const std::string& path() const { return path_; }
  Status Exec(const std::string& sql);
  Result<std::unique_ptr<Statement>> Prepare(const std::string& sql);
  // BEGIN IMMEDIATE; a store still busy after the timeout is an input error naming the store.
  Status BeginImmediate();
  int64_t LastInsertId() const { return sqlite3_last_insert_rowid(db_); }
  Status Commit();
  void Rollback();
  // A value from the meta table ("" when absent) and its setter.
  Result<std::string> Meta(const std::string& key);
  Status SetMeta(const std::string& key, const std::string& value);
  // SHA-256 over a canonical dump of every table (rows in key order): equal
  // digests mean equal stores, whatever the page layout.
  Result<std::string> ContentDigest();

 private:
  StoreDb(sqlite3* db, std::string path) : db_(db), path_(std::move(path)) {}
  Status Error(const std::string& what) const;
  sqlite3* db_;
  std::string path_;
};

// Tie kinds in the ties table (same names as the split stage's tie_by).
enum TieKind : int { kTiePrompt = 0, kTieNear = 1, kTieThread = 2, kTieAnnotator = 3, kTieGroup = 4 };

}  // namespace prefsift::store
