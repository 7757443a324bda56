#pragma once
// Options shared by the `fit` and `outlook` verbs: the series file and how to fit it.

#include <CLI/CLI.hpp>
#include <string>

#include "plimsoll/base/status.h"
#include "plimsoll/fit/fit.h"
#include "plimsoll/fit/series_file.h"

namespace plimsoll::cli {

struct FitFlags {
  std::string file;
  int period = 1;
  std::string forms = "auto";
  std::string region = "usual";
  std::string error;  // "", "A" or "M"
  bool no_damped = false;
  std::string alpha, beta, gamma, phi;  // "" | value | LOW:HIGH
  int starts = fit::FitOptions{}.starts;
  int max_evaluations = fit::FitOptions{}.max_evaluations;
};

// Adds FILE and the fitting options to `verb`, storing into `flags` (which must outlive parsing).
void AddFitFlags(CLI::App& verb, FitFlags& flags);

// The file and the options it implies, checked once.
struct FitInput {
  fit::SeriesText series;
  fit::FitOptions options;
  bool forms_forced = false;  // the user listed forms
};

// Reads the file and builds validated options. Errors name the file line or the option; a
// history with a non-positive value is refused when a listed form needs positive data.
Result<FitInput> LoadFitInput(const FitFlags& flags);

// Runs selection on the input, adding the file name and a line hint to errors.
Result<fit::Selection> SelectForInput(const FitInput& input, const std::string& file);

// "%.*g" formatting for tables.
std::string Num(double v, int digits = 6);

}  // namespace plimsoll::cli
