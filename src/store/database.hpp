#pragma once
/// The results database connection: one small interface, two backends. SQLite (libsqlite3) is
/// embedded and the default: a plain path names a database file, created when missing.
/// PostgreSQL (libpq) serves a line of stations writing to one server: a target starting with
/// `postgresql://` or `postgres://` is a libpq connection URI. The schema and every statement
/// are the same on both (store/schema.hpp, docs/results-db.md); statements are written with `?`
/// placeholders, which the PostgreSQL backend numbers ($1, $2, …). Values are always bound as
/// parameters, never spliced into SQL text.
///
/// SQLite is opened in WAL mode with a busy timeout, so several processes can write one file:
/// a writer waits for another's transaction instead of failing (SQLite docs, "Write-Ahead
/// Logging"; sqlite3_busy_timeout). Transactions start with BEGIN IMMEDIATE, which takes the
/// write lock at once, so two writers never deadlock upgrading a read lock. synchronous=NORMAL
/// in WAL mode survives a killed process (a committed transaction is in the WAL file); only a
/// power cut may lose the last transactions, never corrupt the file.
///
/// Errors: every failure throws DatabaseError naming the target (a URL with its password
/// replaced by ***) and the backend's own message.
///
/// Usage:
///   auto db = store::open_database("results.sqlite");
///   db->begin();
///   const auto id = db->insert_returning_id("INSERT INTO run (tool_version) VALUES (?)", {std::string("0.1.0")});
///   db->commit();
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <variant>
#include <vector>

#include "core/error.hpp"

namespace periodfit::store {

/// A failure of the results database (cannot connect, a statement failed, a schema newer than
/// this periodfit). what(): "results database <target>: <reason>".
class DatabaseError : public Error {
 public:
  DatabaseError(const std::string& target, const std::string& reason);
};

/// A bound parameter: NULL, an integer, a double (NaN and infinities are bound as NULL) or text.
using Value = std::variant<std::monostate, std::int64_t, double, std::string>;

/// One row of a query result: each column as text (NULL = nullopt). Integers and doubles come
/// back in their shortest round-trip decimal form.
using Row = std::vector<std::optional<std::string>>;

enum class Dialect { sqlite, postgresql };

class Connection {
 public:
  virtual ~Connection() = default;
  virtual Dialect dialect() const = 0;
  /// The target as given, with any password replaced by *** (for messages).
  virtual const std::string& target() const = 0;
  /// Runs one statement (no result rows expected).
  void execute(const std::string& sql, const std::vector<Value>& params = {}) { run(sql, params, nullptr); }
  /// Runs one statement and returns its rows.
  std::vector<Row> query(const std::string& sql, const std::vector<Value>& params = {}) {
    std::vector<Row> rows;
    run(sql, params, &rows);
    return rows;
  }
  /// Runs several statements without parameters (schema scripts).
  virtual void execute_script(const std::string& sql) = 0;
  /// Starts a write transaction (SQLite: BEGIN IMMEDIATE).
  virtual void begin() = 0;
  virtual void commit() = 0;
  /// Never throws (used on error paths).
  virtual void rollback() noexcept = 0;
  /// Number of rows the last INSERT/UPDATE/DELETE changed.
  virtual std::int64_t changes() const = 0;

  /// The backend's one statement runner: binds `params` to the `?` placeholders, runs `sql`,
  /// and appends the result rows to `rows` when it is not null.
  virtual void run(const std::string& sql, const std::vector<Value>& params, std::vector<Row>* rows) = 0;

  /// An INSERT … with `RETURNING id` appended; the new row's id, or nullopt when the statement
  /// inserted nothing (ON CONFLICT DO NOTHING).
  std::optional<std::int64_t> insert_returning_id(const std::string& sql, const std::vector<Value>& params);
};

/// True when `target` is a PostgreSQL URI.
bool is_postgresql_target(const std::string& target);

/// `target` with the password of a URI replaced by ***.
std::string redact_target(const std::string& target);

/// Opens (SQLite: creates when missing) the database `target`. Throws DatabaseError.
std::unique_ptr<Connection> open_database(const std::string& target);

/// Runs `work` inside begin()/commit(); rolls back and rethrows on any exception.
template <typename F>
void in_transaction(Connection& db, F&& work) {
  db.begin();
  try {
    work();
    db.commit();
  } catch (...) {
    db.rollback();
    throw;
  }
}

}  // namespace periodfit::store
