#pragma once
/// Times in the results database: UTC as ISO 8601 text with milliseconds and a Z
/// ("2026-12-02T16:40:05.123Z"), which both engines store as TEXT and which sorts as time does.
#include <string>

namespace periodfit::store {

/// Now, as ISO 8601 UTC text.
std::string utc_now_text();

/// The host name of this machine ("" when unknown).
std::string host_name();

}  // namespace periodfit::store
