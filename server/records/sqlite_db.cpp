#include "sqlite_db.hpp"

namespace droopline::records {

Stmt::Stmt(sqlite3* db, std::string_view sql) : db_(db) {
  if (sqlite3_prepare_v2(db, sql.data(), static_cast<int>(sql.size()), &stmt_, nullptr) != SQLITE_OK) {
    error_ = sqlite3_errmsg(db);
    sqlite3_finalize(stmt_);
    stmt_ = nullptr;
  }
}

Stmt::~Stmt() { sqlite3_finalize(stmt_); }

Stmt& Stmt::bind(int i, std::string_view text) {
  if (stmt_) sqlite3_bind_text(stmt_, i, text.data(), static_cast<int>(text.size()), SQLITE_TRANSIENT);
  return *this;
}

Stmt& Stmt::bind(int i, double value) {
  if (stmt_) sqlite3_bind_double(stmt_, i, value);
  return *this;
}

Stmt& Stmt::bind(int i, long long value) {
  if (stmt_) sqlite3_bind_int64(stmt_, i, value);
  return *this;
}

Stmt& Stmt::bind(int i, std::optional<double> value) { return value ? bind(i, *value) : bind_null(i); }

Stmt& Stmt::bind_null(int i) {
  if (stmt_) sqlite3_bind_null(stmt_, i);
  return *this;
}

bool Stmt::row() {
  if (!stmt_) return false;
  const int rc = sqlite3_step(stmt_);
  if (rc == SQLITE_ROW) return true;
  if (rc != SQLITE_DONE) error_ = sqlite3_errmsg(db_);
  return false;
}

bool Stmt::run() {
  while (row()) {
  }
  return stmt_ && error_.empty();
}

std::string Stmt::text(int col) const {
  const auto* p = sqlite3_column_text(stmt_, col);
  return p ? std::string(reinterpret_cast<const char*>(p), static_cast<std::size_t>(sqlite3_column_bytes(stmt_, col)))
           : std::string();
}

std::optional<double> Stmt::opt_real(int col) const {
  if (null(col)) return std::nullopt;
  return real(col);
}

bool Db::open(const std::string& path, bool create, bool read_only, std::string& error) {
  close();
  const int flags = (read_only ? SQLITE_OPEN_READONLY : SQLITE_OPEN_READWRITE) | (create ? SQLITE_OPEN_CREATE : 0) |
                    SQLITE_OPEN_NOMUTEX;
  if (sqlite3_open_v2(path.c_str(), &db_, flags, nullptr) != SQLITE_OK) {
    error = db_ ? sqlite3_errmsg(db_) : "out of memory";
    close();
    return false;
  }
  sqlite3_extended_result_codes(db_, 1);
  sqlite3_busy_timeout(db_,
                       2000);  // a reader and the writer share the file: wait briefly, not fail
  return true;
}

void Db::close() {
  if (db_) sqlite3_close_v2(db_);
  db_ = nullptr;
}

bool Db::exec(const std::string& sql, std::string& error) {
  char* msg = nullptr;
  if (sqlite3_exec(db_, sql.c_str(), nullptr, nullptr, &msg) != SQLITE_OK) {
    error = msg ? msg : sqlite3_errmsg(db_);
    sqlite3_free(msg);
    return false;
  }
  return true;
}

int Db::user_version(std::string& error) {
  Stmt s(db_, "PRAGMA user_version");
  if (!s.row()) {
    error = s.error().empty() ? "cannot read PRAGMA user_version" : s.error();
    return -1;
  }
  return static_cast<int>(s.integer(0));
}

}  // namespace droopline::records
