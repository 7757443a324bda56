#pragma once
// The plimsoll command line: one verb per subcommand (watch, demo, fit, outlook, staff, backfill,
// inspect, broker). Main() parses argv, runs the chosen verb and returns the process exit code:
// 0 success, 1 run-time failure (message on stderr), 2 usage error.
// Thread-safety: call once, from main().

namespace plimsoll::cli {

int Main(int argc, char** argv);

}  // namespace plimsoll::cli
