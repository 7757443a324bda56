#pragma once
// Each verb lives in its own src/cli/<verb>_command.cc and registers itself here through one
// Add...Command function, called from app.cc. A verb's callback stores its exit code in `exit_code`.

#include <CLI/CLI.hpp>

namespace plimsoll::cli {

struct CommandContext {
  int exit_code = 0;
};

}  // namespace plimsoll::cli
