#include "batch/shard.hpp"

#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <charconv>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <limits>
#include <map>
#include <optional>
#include <nlohmann/json.hpp>
#include <set>

#include "batch/report_folder.hpp"
#include "core/error.hpp"
#include "output/json_writer.hpp"
#include "io/file_handle.hpp"
#include "io/output_file.hpp"

namespace periodfit::batch {

namespace fs = std::filesystem;
using json = nlohmann::ordered_json;

namespace {

constexpr const char* kShardFormat = "periodfit-batch-shard";
constexpr int kShardVersion = 1;
constexpr int kMaxShards = 100000;
constexpr const char* kManifest = "shard.json";
constexpr const char* kSections = "shard-sections.html";
// Missing captures listed per problem before "… and N more" (the full list is in shard.json).
constexpr std::size_t kListedCaptures = 50;

// Doubles of the records: finite ones as JSON numbers (nlohmann writes the shortest text that
// reads back to the same double, and reads it back exactly), NaN and infinities as strings,
// since JSON has no such numbers and a record must give back the very value it was given.
json double_json(double v) {
  if (std::isfinite(v)) return v;
  if (std::isnan(v)) return "nan";
  return v > 0 ? "inf" : "-inf";
}

double double_from(const json& j) {
  if (j.is_number()) return j.get<double>();
  const std::string t = j.get<std::string>();
  if (t == "inf") return std::numeric_limits<double>::infinity();
  if (t == "-inf") return -std::numeric_limits<double>::infinity();
  if (t == "nan") return std::numeric_limits<double>::quiet_NaN();
  throw std::invalid_argument("not a number: " + t);
}

json file_record(const FileResult& r, const report::ReportRow& row, const std::string& key,
                 std::uint64_t offset, std::uint64_t size) {
  json j;
  j["path"] = r.path;
  j["key"] = key;
  j["status"] = report::status_text(r.status);
  j["error"] = r.error;
  j["flags"] = r.flags;
  j["failing_flags"] = r.failing_flags;
  json keys = json::array();
  for (const auto& [name, value] : r.key_results) keys.push_back({name, value});
  j["key_results"] = std::move(keys);
  json limits = json::array();
  for (const auto& o : r.limits) {
    limits.push_back({{"evaluated", o.evaluated},
                      {"passed", o.passed},
                      {"value", double_json(o.measured.value)},
                      {"lo95", double_json(o.measured.lo95)},
                      {"hi95", double_json(o.measured.hi95)},
                      {"u", double_json(o.measured.u)},
                      {"k", double_json(o.measured.k)},
                      {"measured", o.measured_text},
                      {"verdict", o.verdict},
                      {"margin", double_json(o.margin)},
                      {"margin_fraction", double_json(o.margin_fraction)}});
  }
  j["limits"] = std::move(limits);
  j["json"] = r.json_file;
  json x = json::array(), y = json::array();
  for (double v : r.response.x) x.push_back(double_json(v));
  for (double v : r.response.y) y.push_back(double_json(v));
  j["response"] = {{"x", std::move(x)}, {"y", std::move(y)}, {"passed", r.response.passed}};
  j["row"] = {{"key_results", row.key_results}, {"failing", row.failing}, {"flags", row.flags}, {"error", row.error}};
  j["section"] = {offset, size};
  return j;
}

report::FileStatus status_from(const std::string& text) {
  if (const auto status = report::file_status_from(text)) return *status;
  throw std::invalid_argument("unknown status " + text);
}

/// One capture a shard held, as read back from its shard.json.
struct HeldCapture {
  FileResult result;
  report::ReportRow row;
  std::string key;
  std::uint64_t offset = 0, size = 0;
  std::size_t shard = 0;  ///< index into the gather's manifests
};

HeldCapture capture_from(const json& j) {
  HeldCapture c;
  FileResult& r = c.result;
  r.path = j.at("path").get<std::string>();
  c.key = j.at("key").get<std::string>();
  r.status = status_from(j.at("status").get<std::string>());
  r.error = j.at("error").get<std::string>();
  r.flags = j.at("flags").get<std::vector<std::string>>();
  r.failing_flags = j.at("failing_flags").get<std::vector<std::string>>();
  for (const auto& kv : j.at("key_results")) r.key_results.emplace_back(kv.at(0).get<std::string>(), kv.at(1).get<std::string>());
  for (const auto& l : j.at("limits")) {
    LimitOutcome o;
    o.evaluated = l.at("evaluated").get<bool>();
    o.passed = l.at("passed").get<bool>();
    o.measured.value = double_from(l.at("value"));
    o.measured.lo95 = double_from(l.at("lo95"));
    o.measured.hi95 = double_from(l.at("hi95"));
    o.measured.u = double_from(l.at("u"));
    o.measured.k = double_from(l.at("k"));
    o.measured_text = l.at("measured").get<std::string>();
    o.verdict = l.at("verdict").get<std::string>();
    o.margin = double_from(l.at("margin"));
    o.margin_fraction = double_from(l.at("margin_fraction"));
    r.limits.push_back(std::move(o));
  }
  r.json_file = j.at("json").get<std::string>();
  const json& response = j.at("response");
  for (const auto& v : response.at("x")) r.response.x.push_back(double_from(v));
  for (const auto& v : response.at("y")) r.response.y.push_back(double_from(v));
  r.response.passed = response.at("passed").get<bool>();
  if (r.response.x.size() != r.response.y.size()) throw std::invalid_argument("response x and y differ in length");
  // The gather copies this file into the gathered folder: it must be a per-file JSON of the
  // shard's own files/ folder, never a path an edited record points elsewhere with.
  if (!r.json_file.starts_with("files/") || r.json_file.find('/', 6) != std::string::npos ||
      r.json_file.find("..") != std::string::npos || !r.json_file.ends_with(".json"))
    throw std::invalid_argument("per-file JSON \"" + r.json_file + "\" is not files/<name>.json");
  const json& row = j.at("row");
  c.row.path = r.path;
  c.row.status = r.status;
  c.row.key_results = row.at("key_results").get<std::string>();
  c.row.failing = row.at("failing").get<std::vector<std::string>>();
  c.row.flags = row.at("flags").get<std::vector<std::string>>();
  c.row.error = row.at("error").get<std::string>();
  c.offset = j.at("section").at(0).get<std::uint64_t>();
  c.size = j.at("section").at(1).get<std::uint64_t>();
  return c;
}

std::string derived_run_id(const BatchOptions& o) {
  std::string identity = std::string(PERIODFIT_VERSION) + '\n' + o.settings.hash() + '\n' +
                         std::to_string(o.shard.count) + '\n';
  for (const auto& input : o.inputs) identity += input + '\n';
  return "pf-" + hex64(fnv1a_64(identity));
}

}  // namespace

std::string shard_run_id(const BatchOptions& o) { return o.run_id.empty() ? derived_run_id(o) : o.run_id; }

namespace {

/// A shard's report folder as the gather reads it.
struct Manifest {
  std::string folder;
  std::string periodfit;
  std::string settings_hash;
  std::string run_id;
  ShardSpec shard;
  std::vector<std::string> inputs;
  SettingsRecord settings;
  std::vector<HeldCapture> held;
  /// FNV-1a 64 of the records and of the listing as written, to tell two copies of a shard
  /// apart; the listing itself goes into the gather's union and is not kept per shard, so the
  /// gather's memory grows with the captures, not with captures × shards.
  std::uint64_t held_hash = 0, listing_hash = 0;
};

/// Reads `folder`'s shard.json; adds its listing to `listing` (path → shard).
Manifest read_manifest(const std::string& folder, std::map<std::string, int>& listing) {
  const std::string path = (fs::path(folder) / kManifest).string();
  std::ifstream in(path, std::ios::binary);
  if (!in) throw IoError(path, "cannot open", errno ? errno : ENOENT);
  json j;
  try {
    j = json::parse(in);
    if (j.at("format") != kShardFormat)
      throw InputError(path, 0, 0, "not a shard record (format is not \"" + std::string(kShardFormat) + "\")");
    if (j.at("version") != kShardVersion)
      throw InputError(path, 0, 0, "shard record version " + j.at("version").dump() + " is not " +
                                       std::to_string(kShardVersion) + "; gather with the periodfit that made it");
    Manifest m;
    m.folder = folder;
    m.periodfit = j.at("periodfit").get<std::string>();
    m.run_id = j.at("run_id").get<std::string>();
    m.shard.index = j.at("shard").at("index").get<int>();
    m.shard.count = j.at("shard").at("count").get<int>();
    const json& settings = j.at("settings");
    m.settings_hash = settings.at("hash").get<std::string>();
    m.settings.config_source = settings.at("config").get<std::string>();
    m.settings.config_text = settings.at("config_text").get<std::string>();
    m.settings.settings_words = settings.at("words").get<std::vector<std::string>>();
    if (m.settings.hash() != m.settings_hash)
      throw InputError(path, 0, 0, "the settings hash does not match the recorded settings (the record was edited)");
    m.inputs = j.at("inputs").get<std::vector<std::string>>();
    for (const auto& e : j.at("listing")) listing.emplace(e.at(0).get<std::string>(), e.at(1).get<int>());
    m.listing_hash = fnv1a_64(j.at("listing").dump());
    const json& held = j.at("held");
    m.held_hash = fnv1a_64(held.dump());
    for (const auto& record : held) m.held.push_back(capture_from(record));
    if (m.shard.count < 1 || m.shard.index < 1 || m.shard.index > m.shard.count)
      throw InputError(path, 0, 0, "shard " + std::to_string(m.shard.index) + "/" + std::to_string(m.shard.count) + " is not K/N with 1 ≤ K ≤ N");
    return m;
  } catch (const json::exception& e) {
    throw InputError(path, 0, 0, std::string("malformed shard record: ") + e.what());
  } catch (const std::invalid_argument& e) {
    throw InputError(path, 0, 0, std::string("malformed shard record: ") + e.what());
  }
}

/// Why `folder` has no shard record: its run is still going, was stopped, or never started,
/// read from the report folder's lock file beside it (batch/report_folder.hpp), which a run
/// creates before anything else and leaves behind.
std::string unfinished_reason(const std::string& folder) {
  fs::path target = fs::absolute(fs::path(folder)).lexically_normal();
  if (!target.has_filename()) target = target.parent_path();
  const std::optional<io::FileHandle> lock = io::FileHandle::open_readable_if_present(report_lock_path(folder));
  std::error_code ec;
  const bool exists = fs::exists(target, ec);
  const std::string what = exists ? "holds no " + std::string(kManifest) : "does not exist";
  if (!lock) return what + ": its shard never ran";
  const std::string pid = lock_holder(*lock);
  const bool running = ::flock(lock->fd(), LOCK_SH | LOCK_NB) != 0 && errno == EWOULDBLOCK;
  const std::string by = pid.empty() ? "" : " (pid " + pid + ")";
  if (running) return what + ": its shard is still running" + by;
  return what + ": its shard started" + by + " but did not finish (killed, stopped by an error, or its folder was removed)";
}

std::string shard_text(int index, int count) { return std::to_string(index) + "/" + std::to_string(count); }

std::string capture_list(const std::vector<std::string>& paths) {
  std::string out;
  for (std::size_t i = 0; i < paths.size() && i < kListedCaptures; ++i) out += (i ? ", " : "") + paths[i];
  if (paths.size() > kListedCaptures) out += " … and " + std::to_string(paths.size() - kListedCaptures) + " more";
  return out;
}

std::string count_text(std::size_t n) { return std::to_string(n) + (n == 1 ? " capture" : " captures"); }

void check_same_run(const Manifest& a, const Manifest& b) {
  const auto differ = [&](const std::string& what, const std::string& va, const std::string& vb) {
    throw InputError((fs::path(b.folder) / kManifest).string(), 0, 0,
                     "made with " + what + " " + vb + ", but " + (fs::path(a.folder) / kManifest).string() +
                         " with " + va + "; gather only the shards of one run");
  };
  if (a.periodfit != b.periodfit) differ("periodfit", a.periodfit, b.periodfit);
  if (a.settings_hash != b.settings_hash) differ("settings (config hash)", a.settings_hash, b.settings_hash);
  if (a.shard.count != b.shard.count)
    differ("a partition into", std::to_string(a.shard.count) + " shards", std::to_string(b.shard.count) + " shards");
  if (a.inputs != b.inputs) {
    std::string ia, ib;
    for (const auto& i : a.inputs) ia += (ia.empty() ? "" : " ") + i;
    for (const auto& i : b.inputs) ib += (ib.empty() ? "" : " ") + i;
    differ("inputs", ia, ib);
  }
  if (a.run_id != b.run_id) differ("run id", a.run_id, b.run_id);
}

std::string read_span(std::ifstream& in, const std::string& path, std::uint64_t offset, std::uint64_t size) {
  std::string bytes(size, '\0');
  in.clear();
  in.seekg(static_cast<std::streamoff>(offset));
  in.read(bytes.data(), static_cast<std::streamsize>(size));
  if (static_cast<std::uint64_t>(in.gcount()) != size)
    throw InputError(path, 0, 0, "shorter than its shard record says (truncated?)");
  return bytes;
}

std::string read_whole(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw IoError(path, "cannot open", errno ? errno : ENOENT);
  return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

}  // namespace

std::uint64_t fnv1a_64(std::string_view bytes) {
  std::uint64_t h = 14695981039346656037ull;
  for (const char ch : bytes) {
    const auto c = static_cast<unsigned char>(ch);
    h ^= c;
    h *= 1099511628211ull;
  }
  return h;
}

std::string hex64(std::uint64_t value) {
  static constexpr char kDigits[] = "0123456789abcdef";
  std::string out(16, '0');
  for (int i = 15; i >= 0; --i, value >>= 4) out[static_cast<std::size_t>(i)] = kDigits[value & 0xF];
  return out;
}

std::string SettingsRecord::hash() const {
  // Length-prefixed fields, so no two different records give the same byte string.
  std::string bytes;
  const auto add = [&](const std::string& field) { bytes += std::to_string(field.size()) + ':' + field; };
  add(config_source);
  add(config_text);
  add(std::to_string(settings_words.size()));
  for (const auto& w : settings_words) add(w);
  return hex64(fnv1a_64(bytes));
}

ShardSpec parse_shard(std::string_view text, std::string_view field) {
  const auto bad = [&]() -> ShardSpec {
    throw OptionError(field, text, "give K/N: shard K of N, 1 ≤ K ≤ N ≤ " + std::to_string(kMaxShards));
  };
  const auto slash = text.find('/');
  if (slash == std::string_view::npos) return bad();
  ShardSpec s;
  const auto parse = [](std::string_view t, int& v) {
    const auto [ptr, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
    return !t.empty() && ec == std::errc{} && ptr == t.data() + t.size();
  };
  if (!parse(text.substr(0, slash), s.index) || !parse(text.substr(slash + 1), s.count)) return bad();
  if (s.count < 1 || s.count > kMaxShards || s.index < 1 || s.index > s.count) return bad();
  return s;
}

int shard_of(std::string_view key, int count) {
  return static_cast<int>(fnv1a_64(key) % static_cast<std::uint64_t>(count)) + 1;
}

std::string partition_key(const std::string& path, const std::vector<std::string>& inputs) {
  const fs::path p(path);
  std::string best;
  std::size_t best_depth = 0;
  for (const auto& input : inputs) {
    const fs::path base(input);
    const fs::path rel = p.lexically_relative(base);
    if (rel.empty() || *rel.begin() == "..") continue;
    const std::size_t depth = static_cast<std::size_t>(std::distance(base.begin(), base.end()));
    if (rel != "." && (best.empty() || depth > best_depth)) {
      best = rel.generic_string();
      best_depth = depth;
    }
  }
  return best.empty() ? p.filename().string() : best;
}

std::string shard_folder_name(const ShardSpec& shard) {
  return "shard-" + std::to_string(shard.index) + "-of-" + std::to_string(shard.count);
}

void write_shard_record(const std::string& folder, const BatchOptions& options,
                        const std::vector<std::pair<std::string, int>>& listing,
                        const std::vector<FileResult>& files, const std::vector<report::ReportRow>& rows,
                        const std::function<void(std::size_t, const report::HtmlSink&)>& section_body) {
  const fs::path dir(folder);
  json held = json::array();
  {
    io::AtomicFile sections((dir / kSections).string());
    std::uint64_t offset = 0;
    for (std::size_t i = 0; i < files.size(); ++i) {
      const std::uint64_t start = offset;
      section_body(i, [&](std::string_view bytes) {
        sections.write(bytes);
        offset += bytes.size();
      });
      held.push_back(file_record(files[i], rows[i], partition_key(files[i].path, options.inputs), start, offset - start));
    }
    sections.commit();
  }
  json j;
  j["format"] = kShardFormat;
  j["version"] = kShardVersion;
  j["periodfit"] = PERIODFIT_VERSION;
  j["run_id"] = shard_run_id(options);
  j["shard"] = {{"index", options.shard.index},
                {"count", options.shard.count},
                {"partition", "fnv1a-64(path relative to its input folder) mod count + 1"}};
  j["settings"] = {{"hash", options.settings.hash()},
                   {"config", options.settings.config_source},
                   {"config_text", options.settings.config_text},
                   {"words", options.settings.settings_words}};
  j["inputs"] = options.inputs;
  json list = json::array();
  for (const auto& [path, shard] : listing) list.push_back({path, shard});
  j["listing"] = std::move(list);
  j["held"] = std::move(held);
  io::write_file_atomic((dir / kManifest).string(), output::json_text(j));
}

void GatherOptions::validate() const {
  if (shards.empty()) throw OptionError("shards", "(none)", "give the report folders of the shards");
  if (report_dir.empty()) throw OptionError("report", "\"\"", "a report folder is required");
  if (!rebuild_config) throw OptionError("rebuild_config", "(empty)", "required");
}

namespace {

// The manifests of the folders given, each folder once; an unfinished folder is a problem.
// `listing` gets the run's capture list: the union of what the shards saw, each with its shard.
std::vector<Manifest> read_manifests(const GatherOptions& options, std::map<std::string, int>& listing,
                                     GatherResult& out) {
  std::error_code ec;
  std::vector<Manifest> manifests;
  std::set<std::string> seen_folders;
  for (const auto& folder : options.shards) {
    const std::string canonical = fs::weakly_canonical(folder, ec).string();
    if (!seen_folders.insert(canonical).second) {
      out.warnings.push_back(folder + ": given more than once; read once");
      continue;
    }
    if (!fs::exists(fs::path(folder) / kManifest, ec)) {
      out.problems.push_back(folder + " " + unfinished_reason(folder));
      continue;
    }
    manifests.push_back(read_manifest(folder, listing));
  }
  return manifests;
}

/// Which manifest stands for each shard number 1…N (-1: none), and which numbers have two
/// manifests that disagree.
struct ShardChoice {
  std::vector<int> by_shard;
  std::vector<bool> conflict;
};

// One manifest per shard number: a second copy with the same records is the same result
// (read once, with a warning); different records cannot both be right.
ShardChoice choose_manifests(const std::vector<Manifest>& manifests, int count, GatherResult& out) {
  ShardChoice choice{std::vector<int>(static_cast<std::size_t>(count) + 1, -1),
                     std::vector<bool>(static_cast<std::size_t>(count) + 1, false)};
  for (std::size_t i = 0; i < manifests.size(); ++i) {
    const int k = manifests[i].shard.index;
    int& first = choice.by_shard[static_cast<std::size_t>(k)];
    if (first < 0) {
      first = static_cast<int>(i);
      continue;
    }
    const Manifest& a = manifests[static_cast<std::size_t>(first)];
    const std::string text = shard_text(k, count);
    if (a.held_hash == manifests[i].held_hash && a.listing_hash == manifests[i].listing_hash) {
      out.warnings.push_back("shard " + text + " was run twice (" + a.folder + ", " + manifests[i].folder +
                             ") with identical results; " + manifests[i].folder + " is not counted");
    } else if (!choice.conflict[static_cast<std::size_t>(k)]) {
      choice.conflict[static_cast<std::size_t>(k)] = true;
      out.problems.push_back("shard " + text + " was run twice with different results (" + a.folder + ": " +
                             count_text(a.held.size()) + ", " + manifests[i].folder + ": " +
                             count_text(manifests[i].held.size()) + "); remove the one that is out of date");
    }
  }
  return choice;
}

// A problem for every shard that is missing, and for every shard that ran before some of its
// share existed (captures added to the archive after it ran).
void check_shares(const std::vector<Manifest>& manifests, const std::map<std::string, int>& listing,
                  const ShardChoice& choice, int count, GatherResult& out) {
  std::vector<std::vector<std::string>> owned(static_cast<std::size_t>(count) + 1);
  for (const auto& [path, k] : listing)
    if (k >= 1 && k <= count) owned[static_cast<std::size_t>(k)].push_back(path);
  for (int k = 1; k <= count; ++k) {
    const auto ks = static_cast<std::size_t>(k);
    const std::string text = shard_text(k, count);
    if (choice.by_shard[ks] < 0) {
      out.problems.push_back("shard " + text + " is missing; it holds " + count_text(owned[ks].size()) +
                             (owned[ks].empty() ? "" : ": " + capture_list(owned[ks])));
      continue;
    }
    if (choice.conflict[ks]) continue;
    const Manifest& m = manifests[static_cast<std::size_t>(choice.by_shard[ks])];
    std::set<std::string> held;
    for (const auto& c : m.held) held.insert(c.result.path);
    std::vector<std::string> absent;
    for (const auto& path : owned[ks])
      if (!held.count(path)) absent.push_back(path);
    if (!absent.empty())
      out.problems.push_back("shard " + text + " (" + m.folder + ") ran before " + count_text(absent.size()) +
                             " of its share existed: " + capture_list(absent) + "; run shard " + text + " again");
  }
}

// Complete: every capture once, in path order, as a single run lists them. A capture in the
// wrong shard or in two shards is an input error.
std::vector<HeldCapture> merge_captures(std::vector<Manifest>& manifests, const std::vector<int>& by_shard, int count) {
  std::vector<HeldCapture> all;
  for (int k = 1; k <= count; ++k) {
    Manifest& m = manifests[static_cast<std::size_t>(by_shard[static_cast<std::size_t>(k)])];
    for (auto& c : m.held) {
      if (shard_of(c.key, count) != k)
        throw InputError((fs::path(m.folder) / kManifest).string(), 0, 0,
                         c.result.path + " is recorded in shard " + shard_text(k, count) + " but belongs to shard " +
                             shard_text(shard_of(c.key, count), count));
      c.shard = static_cast<std::size_t>(by_shard[static_cast<std::size_t>(k)]);
      all.push_back(std::move(c));
    }
  }
  std::sort(all.begin(), all.end(), [](const HeldCapture& a, const HeldCapture& b) { return a.result.path < b.result.path; });
  for (std::size_t i = 1; i < all.size(); ++i)
    if (all[i].result.path == all[i - 1].result.path)
      throw InputError(all[i].result.path, 0, 0,
                       "held by two shards (" + manifests[all[i - 1].shard].folder + ", " + manifests[all[i].shard].folder +
                           "); a capture is counted once");
  return all;
}

// The gathered run's outputs in `staging`: the per-file JSON renumbered in path order, the
// summaries and report.html (sections copied from the shards' section files), gather.json.
std::vector<FileResult> write_gathered(const fs::path& staging, const BatchConfig& config,
                                       const std::vector<Manifest>& manifests, const std::vector<int>& by_shard,
                                       std::vector<HeldCapture>& all, const std::string& run_id) {
  std::vector<FileResult> files;
  std::vector<report::ReportRow> rows;
  files.reserve(all.size());
  rows.reserve(all.size());
  for (std::size_t i = 0; i < all.size(); ++i) {
    HeldCapture& c = all[i];
    const std::string source = (fs::path(manifests[c.shard].folder) / c.result.json_file).string();
    c.result.json_file = per_file_json_name(i, c.result.path);
    io::write_file_atomic((staging / c.result.json_file).string(), read_whole(source));
    files.push_back(c.result);
    rows.push_back(std::move(c.row));
  }
  std::vector<std::ifstream> sections(manifests.size());
  std::vector<std::string> section_paths(manifests.size());
  for (std::size_t i = 0; i < manifests.size(); ++i) {
    section_paths[i] = (fs::path(manifests[i].folder) / kSections).string();
    sections[i].open(section_paths[i], std::ios::binary);
    if (!sections[i]) throw IoError(section_paths[i], "cannot open", errno ? errno : ENOENT);
  }
  write_report_outputs(staging.string(), config, files, rows, [&](std::size_t i, const report::HtmlSink& sink) {
    const HeldCapture& c = all[i];
    sink(read_span(sections[c.shard], section_paths[c.shard], c.offset, c.size));
  });

  const int count = manifests[0].shard.count;
  json record;
  record["format"] = "periodfit-batch-gather";
  record["version"] = 1;
  record["periodfit"] = PERIODFIT_VERSION;
  record["run_id"] = run_id;
  record["settings_hash"] = manifests[0].settings_hash;
  record["shards"] = count;
  json used = json::array();
  for (int k = 1; k <= count; ++k) {
    const Manifest& m = manifests[static_cast<std::size_t>(by_shard[static_cast<std::size_t>(k)])];
    used.push_back({{"index", k}, {"folder", m.folder}, {"captures", m.held.size()}});
  }
  record["from"] = std::move(used);
  io::write_file_atomic((staging / "gather.json").string(), output::json_text(record));
  return files;
}

}  // namespace

GatherResult gather_shards(const GatherOptions& options) {
  options.validate();
  GatherResult out;
  std::error_code ec;
  for (const auto& s : options.shards)
    if (fs::exists(s, ec) && fs::exists(options.report_dir, ec) && fs::equivalent(s, options.report_dir, ec))
      throw OptionError("report", options.report_dir, "is one of the shard folders; give a new folder");

  std::map<std::string, int> listing;
  std::vector<Manifest> manifests = read_manifests(options, listing, out);
  for (std::size_t i = 1; i < manifests.size(); ++i) check_same_run(manifests[0], manifests[i]);
  if (manifests.empty()) return out;  // every folder unfinished: nothing tells N
  const int count = manifests[0].shard.count;
  out.partition.count = count;
  out.run_id = manifests[0].run_id;
  const ShardChoice choice = choose_manifests(manifests, count, out);
  check_shares(manifests, listing, choice, count, out);
  if (!out.problems.empty()) return out;
  std::vector<HeldCapture> all = merge_captures(manifests, choice.by_shard, count);

  const BatchConfig config = options.rebuild_config(manifests[0].settings);
  ReportFolder folder(options.report_dir);
  std::vector<FileResult> files =
      write_gathered(fs::path(folder.staging()), config, manifests, choice.by_shard, all, out.run_id);
  folder.publish();

  out.complete = true;
  out.batch.report_dir = options.report_dir;
  const fs::path dir(options.report_dir);
  out.batch.summary_csv = (dir / "summary.csv").string();
  out.batch.summary_json = (dir / "summary.json").string();
  out.batch.report_html = (dir / "report.html").string();
  out.gather_json = (dir / "gather.json").string();
  count_statuses(files, out.batch);
  out.batch.files = std::move(files);
  return out;
}

}  // namespace periodfit::batch
