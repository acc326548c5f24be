#pragma once
// A thin owner of a SQLite connection and its prepared statements: every value
// goes in as a bound parameter (never spliced into SQL text), every failure
// comes back as SQLite's own reason so the records store can name the file and
// the cause in one message.
#include <sqlite3.h>

#include <optional>
#include <string>
#include <string_view>

namespace droopline::records {

/// One prepared statement; bind, step, read columns. Finalized when it goes.
class Stmt {
 public:
  Stmt(sqlite3* db, std::string_view sql);
  ~Stmt();
  Stmt(const Stmt&) = delete;
  Stmt& operator=(const Stmt&) = delete;

  /// False when the SQL did not prepare (the reason in `error()`).
  bool ok() const { return stmt_ != nullptr; }
  const std::string& error() const { return error_; }
  /// Binds parameter `i` (1-based); chainable.
  Stmt& bind(int i, std::string_view text);
  Stmt& bind(int i, double value);
  Stmt& bind(int i, long long value);
  Stmt& bind(int i, std::optional<double> value);
  Stmt& bind_null(int i);
  /// True while a row is there; false when done or failed (then `failed()` and
  /// `error()`).
  bool row();
  /// Runs to completion; false on failure.
  bool run();
  bool failed() const { return !error_.empty(); }
  /// Columns of the current row (0-based).
  std::string text(int col) const;
  double real(int col) const { return sqlite3_column_double(stmt_, col); }
  long long integer(int col) const { return sqlite3_column_int64(stmt_, col); }
  bool null(int col) const { return sqlite3_column_type(stmt_, col) == SQLITE_NULL; }
  std::optional<double> opt_real(int col) const;

 private:
  sqlite3* db_;
  sqlite3_stmt* stmt_ = nullptr;
  std::string error_;
};

/// One connection.
class Db {
 public:
  Db() = default;
  ~Db() { close(); }
  Db(const Db&) = delete;
  Db& operator=(const Db&) = delete;

  /// Opens (creating when `create`) `path`; false with SQLite's reason in
  /// `error`.
  bool open(const std::string& path, bool create, bool read_only, std::string& error);
  void close();
  bool is_open() const { return db_ != nullptr; }
  sqlite3* get() const { return db_; }
  /// Runs SQL without parameters (one or more statements); false with the
  /// reason in `error`.
  bool exec(const std::string& sql, std::string& error);
  /// `PRAGMA user_version`, or -1 with the reason in `error`.
  int user_version(std::string& error);
  /// Rows changed by the last statement.
  long long changes() const { return sqlite3_changes(db_); }

 private:
  sqlite3* db_ = nullptr;
};

/// Runs `body` inside BEGIN IMMEDIATE ... COMMIT (ROLLBACK when it returns
/// false or a step fails); false with the reason in `error`.
template <typename Body>
bool transaction(Db& db, std::string& error, Body&& body) {
  if (!db.exec("BEGIN IMMEDIATE", error)) return false;
  if (!body(error) || !db.exec("COMMIT", error)) {
    std::string ignored;
    db.exec("ROLLBACK", ignored);
    if (error.empty()) error = "the transaction failed";
    return false;
  }
  return true;
}

}  // namespace droopline::records
