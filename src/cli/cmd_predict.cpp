// Placeholder until the command lands; replaced by its owner.
#include "cli/commands.hpp"
#include "core/error.hpp"

namespace periodfit::cli {
Runner add_predict(CLI::App&) {
  return [] () -> int { throw Error("the predict command is not built yet"); };
}
}  // namespace periodfit::cli
