#include "store/import.hpp"

#include <sys/stat.h>

#include <chrono>
#include <ctime>
#include <filesystem>
#include <nlohmann/json.hpp>

#include "core/error.hpp"
#include "io/output_file.hpp"
#include "store/recorder.hpp"

namespace periodfit::store {

namespace fs = std::filesystem;
using json = nlohmann::ordered_json;

namespace {

json read_json(const std::string& path) {
  const std::string text = io::read_file(path, std::size_t{1} << 30);
  try {
    return json::parse(text);
  } catch (const json::parse_error& e) {
    throw InputError(path, 0, 0, std::string("not valid JSON: ") + e.what());
  }
}

std::string mtime_text(const std::string& path) {
  struct stat st {};
  if (::stat(path.c_str(), &st) != 0) return "";
  std::tm tm{};
  gmtime_r(&st.st_mtim.tv_sec, &tm);
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%04d-%02d-%02dT%02d:%02d:%02d.%03dZ", tm.tm_year + 1900, tm.tm_mon + 1,
                tm.tm_mday, tm.tm_hour, tm.tm_min, tm.tm_sec, static_cast<int>(st.st_mtim.tv_nsec / 1000000));
  return buffer;
}

}  // namespace

ImportResult import_report_folder(const std::string& folder, const std::string& database) {
  const std::string summary_path = (fs::path(folder) / "summary.json").string();
  const json summary = read_json(summary_path);
  if (!summary.is_object() || summary.value("format", "") != "periodfit-batch-summary")
    throw InputError(summary_path, 0, 0, "not a periodfit batch summary (\"format\" is not \"periodfit-batch-summary\")");
  if (!summary.contains("files") || !summary["files"].is_array())
    throw InputError(summary_path, 0, 0, "has no \"files\" array");

  // Every document is read and checked before anything is recorded.
  std::vector<CaptureRecord> records;
  for (const auto& f : summary["files"]) {
    if (!f.is_object() || !f.contains("json") || !f["json"].is_string() || !f.contains("path") || !f["path"].is_string())
      throw InputError(summary_path, 0, 0, "a \"files\" entry lacks \"path\" or \"json\"");
    const std::string doc_path = (fs::path(folder) / f["json"].get<std::string>()).string();
    json doc = read_json(doc_path);
    if (!doc.is_object() || !doc.contains("status"))
      throw InputError(doc_path, 0, 0, "not a periodfit per-file result (no \"status\")");
    records.push_back({f["path"].get<std::string>(), std::nullopt, std::move(doc), mtime_text(doc_path)});
  }

  RunInfo info;
  info.origin = "import";
  info.tool_version = summary.value("periodfit", std::string("unknown"));
  info.mode = summary.value("mode", std::string());
  ImportResult result;
  if (summary.contains("config") && summary["config"].is_string()) {
    info.config_source = summary["config"].get<std::string>();
    std::error_code ec;
    if (fs::is_regular_file(info.config_source, ec)) {
      info.config_text = io::read_file(info.config_source);
      result.config_found = true;
    }
  }
  info.report_dir = fs::absolute(folder).lexically_normal().string();
  info.files_total = static_cast<std::int64_t>(records.size());
  Recorder recorder(database, std::move(info));
  for (const auto& r : records) recorder.record(r);
  recorder.finish();
  result.files = static_cast<std::int64_t>(records.size());
  result.added = recorder.added();
  result.known = recorder.known();
  return result;
}

}  // namespace periodfit::store
