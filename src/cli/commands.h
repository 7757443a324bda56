#pragma once
// Verb registration. Each verb lives in src/cli/<verb>_command.cc and registers itself:
//
//   PLIMSOLL_REGISTER_VERB(AddFitVerb);   // void AddFitVerb(CLI::App& app, CommandContext& ctx)
//
// The function adds a subcommand to `app`; its callback stores the exit code in ctx.exit_code
// (0 ok, 1 run-time failure with the message on stderr). plimsoll_cli is an OBJECT library, so
// every registration reaches the executable.

#include <CLI/CLI.hpp>
#include <functional>

namespace plimsoll::cli {

struct CommandContext {
  int exit_code = 0;
};

using VerbSetup = void (*)(CLI::App& app, CommandContext& context);

// Adds a verb; returns true so the macro can seed a static. Verbs appear in --help in
// registration order, which follows link order; the help text does not depend on it.
bool RegisterVerb(VerbSetup setup);

}  // namespace plimsoll::cli

#define PLIMSOLL_VERB_CONCAT_(a, b) a##b
#define PLIMSOLL_VERB_CONCAT(a, b) PLIMSOLL_VERB_CONCAT_(a, b)
#define PLIMSOLL_REGISTER_VERB(setup) \
  static const bool PLIMSOLL_VERB_CONCAT(plimsoll_verb_registered_, __LINE__) = ::plimsoll::cli::RegisterVerb(setup)
