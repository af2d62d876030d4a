// StoreDb: schema, pragmas, transactions and the content digest.
#include "store/store_db.h"

#include <cstdio>

#include "core/sha256.h"

namespace prefsift::store {
namespace {

// Schema version 1 (docs/store.md, "Tables").
constexpr const char* kSchema = R"sql(
CREATE TABLE IF NOT EXISTS meta(key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS batches(
  batch INTEGER PRIMARY KEY, added_at TEXT NOT NULL, plan_digest TEXT NOT NULL,
  inputs_digest TEXT NOT NULL, inputs TEXT NOT NULL, eval_sets TEXT NOT NULL,
  first_seq INTEGER NOT NULL, records INTEGER NOT NULL, entries INTEGER NOT NULL,
  kept INTEGER NOT NULL, rejected INTEGER NOT NULL, stored INTEGER NOT NULL, counts TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS records(
  seq INTEGER PRIMARY KEY, batch INTEGER NOT NULL, id TEXT NOT NULL, prompt BLOB NOT NULL,
  comparison BLOB NOT NULL, judgment BLOB NOT NULL, cluster INTEGER NOT NULL,
  kept INTEGER NOT NULL, grp INTEGER, split TEXT);
CREATE UNIQUE INDEX IF NOT EXISTS records_by_comparison ON records(comparison);
CREATE INDEX IF NOT EXISTS records_by_cluster ON records(cluster);
CREATE INDEX IF NOT EXISTS records_by_group ON records(grp);
CREATE TABLE IF NOT EXISTS signatures(seq INTEGER PRIMARY KEY, sig BLOB NOT NULL);
CREATE TABLE IF NOT EXISTS bands(bkey INTEGER NOT NULL, seq INTEGER NOT NULL, PRIMARY KEY(bkey, seq)) WITHOUT ROWID;
CREATE TABLE IF NOT EXISTS groups(
  grp INTEGER PRIMARY KEY, gkey BLOB NOT NULL, split TEXT NOT NULL, first_batch INTEGER NOT NULL);
CREATE TABLE IF NOT EXISTS ties(kind INTEGER NOT NULL, tkey BLOB NOT NULL, grp INTEGER NOT NULL,
  PRIMARY KEY(kind, tkey)) WITHOUT ROWID;
CREATE INDEX IF NOT EXISTS ties_by_group ON ties(grp);
)sql";

}  // namespace

bool Statement::Step(Status* error) {
  int rc = sqlite3_step(s_);
  if (rc == SQLITE_ROW) return true;
  if (rc != SQLITE_DONE) *error = Status::Io(std::string("store: ") + sqlite3_errmsg(db_));
  return false;
}

Status Statement::Run() {
  Status s;
  while (Step(&s)) {
  }
  Reset();
  return s;
}

std::string Statement::Text(int col) const {
  const unsigned char* p = sqlite3_column_text(s_, col);
  return p ? std::string(reinterpret_cast<const char*>(p), static_cast<size_t>(sqlite3_column_bytes(s_, col)))
           : std::string();
}

std::string_view Statement::Blob(int col) const {
  const void* p = sqlite3_column_blob(s_, col);
  return p ? std::string_view(static_cast<const char*>(p), static_cast<size_t>(sqlite3_column_bytes(s_, col)))
           : std::string_view();
}

Result<std::unique_ptr<StoreDb>> StoreDb::Open(const std::string& path, int busy_timeout_ms, bool create) {
  sqlite3* db = nullptr;
  int flags = SQLITE_OPEN_READWRITE | (create ? SQLITE_OPEN_CREATE : 0);
  int rc = sqlite3_open_v2(path.c_str(), &db, flags, nullptr);
  if (rc != SQLITE_OK) {
    std::string msg = db ? sqlite3_errmsg(db) : "out of memory";
    sqlite3_close(db);
    return Status::Input("store " + path + ": cannot open (" + msg + ")");
  }
  std::unique_ptr<StoreDb> out(new StoreDb(db, path));
  sqlite3_busy_timeout(db, busy_timeout_ms);
  // WAL: readers (history) never block the writer; synchronous=FULL: a
  // committed batch survives a crash of the machine, not only of the process.
  // cache_size: 128 MiB of page cache, so band-key look-ups and inserts in a
  // store of a million records mostly stay in memory (the default is 2 MiB).
  for (const char* p : {"PRAGMA journal_mode=WAL", "PRAGMA synchronous=FULL", "PRAGMA foreign_keys=OFF",
                        "PRAGMA cache_size=-131072", "PRAGMA temp_store=MEMORY"}) {
    Status s = out->Exec(p);
    if (!s.ok()) return s;
  }
  Status s = out->Exec(kSchema);
  if (!s.ok()) return s;
  auto version = out->Meta("schema_version");
  if (!version.ok()) return version.status();
  if (version.value().empty()) {
    s = out->SetMeta("schema_version", "1");
    if (!s.ok()) return s;
  } else if (version.value() != "1") {
    return Status::Usage("store " + path + ": schema version " + version.value() + " is not supported (this build reads 1)");
  }
  return out;
}

StoreDb::~StoreDb() { sqlite3_close(db_); }

Status StoreDb::Error(const std::string& what) const {
  int rc = sqlite3_errcode(db_);
  std::string msg = "store " + path_ + ": " + what + ": " + sqlite3_errmsg(db_);
  if (rc == SQLITE_BUSY || rc == SQLITE_LOCKED) {
    return Status::Input(msg + " (another run holds the store; retry later or raise --wait)");
  }
  if (rc == SQLITE_NOTADB || rc == SQLITE_CORRUPT) return Status::Input(msg);
  return Status::Io(msg);
}

Status StoreDb::Exec(const std::string& sql) {
  char* err = nullptr;
  int rc = sqlite3_exec(db_, sql.c_str(), nullptr, nullptr, &err);
  sqlite3_free(err);
  if (rc != SQLITE_OK) return Error(sql.substr(0, sql.find_first_of("(\n")));
  return Status::Ok();
}

Result<std::unique_ptr<Statement>> StoreDb::Prepare(const std::string& sql) {
  sqlite3_stmt* s = nullptr;
  if (sqlite3_prepare_v2(db_, sql.c_str(), -1, &s, nullptr) != SQLITE_OK) return Error("prepare");
  return std::make_unique<Statement>(db_, s);
}

Status StoreDb::BeginImmediate() {
  if (sqlite3_exec(db_, "BEGIN IMMEDIATE", nullptr, nullptr, nullptr) != SQLITE_OK) {
    int rc = sqlite3_errcode(db_);
    if (rc == SQLITE_BUSY || rc == SQLITE_LOCKED) {
      return Status::Input("store " + path_ + " is busy: another prefsift run is adding a batch to it; wait for it "
                           "to finish (or pass a longer --wait) and run again");
    }
    return Error("BEGIN IMMEDIATE");
  }
  return Status::Ok();
}

Status StoreDb::Commit() { return Exec("COMMIT"); }

void StoreDb::Rollback() {
  if (!sqlite3_get_autocommit(db_)) sqlite3_exec(db_, "ROLLBACK", nullptr, nullptr, nullptr);
}

Result<std::string> StoreDb::Meta(const std::string& key) {
  auto st = Prepare("SELECT value FROM meta WHERE key = ?");
  if (!st.ok()) return st.status();
  st.value()->Bind(1, key);
  Status err;
  std::string out;
  if (st.value()->Step(&err)) out = st.value()->Text(0);
  if (!err.ok()) return err;
  return out;
}

Status StoreDb::SetMeta(const std::string& key, const std::string& value) {
  auto st = Prepare("INSERT INTO meta(key, value) VALUES(?, ?) ON CONFLICT(key) DO UPDATE SET value = excluded.value");
  if (!st.ok()) return st.status();
  st.value()->Bind(1, key).Bind(2, value);
  return st.value()->Run();
}

Result<std::string> StoreDb::ContentDigest() {
  auto tables = Prepare("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name");
  if (!tables.ok()) return tables.status();
  std::vector<std::string> names;
  Status err;
  while (tables.value()->Step(&err)) names.push_back(tables.value()->Text(0));
  if (!err.ok()) return err;
  Sha256 h;
  for (const auto& name : names) {
    int cols = 0;
    {
      sqlite3_stmt* raw = nullptr;
      sqlite3_prepare_v2(db_, ("SELECT * FROM \"" + name + "\"").c_str(), -1, &raw, nullptr);
      cols = sqlite3_column_count(raw);
      sqlite3_finalize(raw);
    }
    std::string order;
    for (int c = 1; c <= cols; ++c) order += (c > 1 ? "," : "") + std::to_string(c);
    sqlite3_stmt* s = nullptr;
    if (sqlite3_prepare_v2(db_, ("SELECT * FROM \"" + name + "\" ORDER BY " + order).c_str(), -1, &s, nullptr) !=
        SQLITE_OK) {
      return Error("digest");
    }
    h.Update("table " + name + "\n");
    while (sqlite3_step(s) == SQLITE_ROW) {
      for (int c = 0; c < cols; ++c) {
        int t = sqlite3_column_type(s, c);
        std::string cell = std::to_string(t) + ":";
        if (t == SQLITE_INTEGER) cell += std::to_string(sqlite3_column_int64(s, c));
        else if (t == SQLITE_FLOAT) cell += std::to_string(sqlite3_column_double(s, c));
        else if (t != SQLITE_NULL) {
          const void* p = sqlite3_column_blob(s, c);
          int n = sqlite3_column_bytes(s, c);
          cell += std::to_string(n) + ":" + std::string(static_cast<const char*>(p ? p : ""), static_cast<size_t>(n));
        }
        h.Update(cell);
        h.Update("\x1f");
      }
      h.Update("\n");
    }
    sqlite3_finalize(s);
  }
  return h.HexDigest();
}

}  // namespace prefsift::store
