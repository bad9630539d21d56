// Placeholder until the command lands; replaced by its owner.
#include "cli/commands.hpp"
#include "core/error.hpp"

namespace periodfit::cli {
Runner add_identify(CLI::App&) {
  return [] () -> int { throw Error("the identify command is not built yet"); };
}
}  // namespace periodfit::cli
