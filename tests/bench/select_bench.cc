// "select": full automatic model selection over the default candidates on a simulated series,
// against python3-statsmodels (Debian 12, ETSModel) fitting single forms on the same data in the
// same run, plus the likelihood inner loop's evaluation rate.
#include <unistd.h>

#include <time.h>

#include <algorithm>
#include <array>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "bench/bench.h"
#include "plimsoll/fit/fit.h"
#include "plimsoll/model/likelihood.h"
#include "plimsoll/model/simulate.h"
#include "plimsoll/model/spec.h"

namespace plimsoll::bench {
namespace {

// Times ETSModel(...).fit() only (data loaded and the module imported before the clock starts);
// prints "<form> <wall ms> <cpu ms> <llf>" per form.
constexpr const char* kReferenceScript = R"PY(
import sys, time, warnings
import numpy as np
from statsmodels.tsa.exponential_smoothing.ets import ETSModel
y = np.loadtxt(sys.argv[1]); m = int(sys.argv[2])
for form in sys.argv[3:]:
    e, t, s = form[4:-1].split(",")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t0 = time.perf_counter(); c0 = time.process_time()
        res = ETSModel(y, error="add" if e == "A" else "mul", trend=None if t == "N" else "add",
                       damped_trend=(t == "Ad"), seasonal=None if s == "N" else ("add" if s == "A" else "mul"),
                       seasonal_periods=m).fit(disp=False)
        ms = (time.perf_counter() - t0) * 1e3; cpu = (time.process_time() - c0) * 1e3
    print(form, repr(ms), repr(cpu), repr(float(res.llf)))
)PY";

double Millis(std::chrono::steady_clock::duration d) { return std::chrono::duration<double, std::milli>(d).count(); }

// CPU time of this process in ms: on a shared, loaded machine it shows what the work costs when
// wall time is inflated by waiting for a core.
double CpuMillis() {
  timespec ts{};
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) * 1e3 + static_cast<double>(ts.tv_nsec) * 1e-6;
}

BenchReport RunSelectBench(const BenchArgs& args) {
  using Clock = std::chrono::steady_clock;
  const int n = args.quick ? 240 : 1000;
  const int m = args.quick ? 12 : 24;
  // True model ETS(A,Ad,A), positive data so every default candidate is fitted.
  const model::ModelSpec truth{model::ErrorType::kAdditive, model::TrendType::kAdditiveDamped,
                               model::SeasonType::kAdditive, m};
  std::vector<double> season;
  for (int j = 0; j < m; ++j) season.push_back(60 * std::sin(2 * 3.14159265358979 * j / m));
  const std::vector<double> y = model::SimulateSeries(truth, model::Params{0.35, 0.02, 0.08, 0.95},
                                                      model::MakeState(500, 0.4, season), 25.0, n, 20261202);
  fit::FitOptions options;
  options.period = m;

  BenchReport report;
  // Full selection: median of 11 runs (results are deterministic; only the time varies, and on a
  // shared VM it swung by a third between runs of 3).
  constexpr int kRepeats = 11;
  std::vector<double> select_ms, select_cpu_ms;
  int evaluations = 0;
  size_t fitted = 0;
  std::string chosen;
  for (int rep = 0; rep < kRepeats; ++rep) {
    const auto t0 = Clock::now();
    const double c0 = CpuMillis();
    auto sel = fit::SelectModel(y, options);
    select_cpu_ms.push_back(CpuMillis() - c0);
    select_ms.push_back(Millis(Clock::now() - t0));
    if (!sel.ok()) {
      report.notes.push_back("selection failed: " + sel.status().ToString());
      return report;
    }
    evaluations = 0;
    fitted = 0;
    for (const auto& c : sel->candidates) {
      if (c.fit) evaluations += c.fit->evaluations, ++fitted;
    }
    chosen = sel->best().spec.Notation();
  }
  std::sort(select_ms.begin(), select_ms.end());
  std::sort(select_cpu_ms.begin(), select_cpu_ms.end());
  report.Add("n", static_cast<int64_t>(n));
  report.Add("period", static_cast<int64_t>(m));
  report.Add("select_ms", select_ms[kRepeats / 2]);
  report.Add("select_cpu_ms", select_cpu_ms[kRepeats / 2]);
  report.Add("select_cpu_ms_min", select_cpu_ms.front());
  report.Add("select_cpu_ms_max", select_cpu_ms.back());
  report.Add("select_forms_fitted", static_cast<int64_t>(fitted));
  report.Add("select_evaluations", static_cast<int64_t>(evaluations));
  report.Add("chosen", chosen);

  // Inner loop: likelihood evaluations of ETS(A,Ad,A) at the true parameters.
  {
    const auto state = model::MakeState(500, 0.4, season);
    const model::Params p{0.35, 0.02, 0.08, 0.95};
    const int reps = args.quick ? 200 : 2000;
    double sink = 0;
    const double c0 = CpuMillis();
    const auto t0 = Clock::now();
    for (int i = 0; i < reps; ++i) {
      auto r = model::EvaluateLikelihood(truth, p, state, y);
      if (r.ok()) sink += r->loglik;
    }
    const double secs = std::chrono::duration<double>(Clock::now() - t0).count();
    KeepAlive(sink);
    report.Add("loglik_evals_per_s", reps / secs);
    report.Add("loglik_evals_per_cpu_s", reps / ((CpuMillis() - c0) * 1e-3));
  }

  // Per form: ours vs the reference on the same data, in this run.
  const std::vector<std::string> forms = {"ETS(A,Ad,A)", "ETS(M,Ad,A)"};
  std::vector<std::array<double, 3>> ours;  // ms, cpu ms, loglik
  for (const std::string& text : forms) {
    auto spec = model::ParseModelSpec(text, m);
    const auto t0 = Clock::now();
    const double c0 = CpuMillis();
    auto fit = fit::FitModel(*spec, y, options);
    const double cpu = CpuMillis() - c0;
    ours.push_back({Millis(Clock::now() - t0), cpu, fit.ok() ? fit->loglik : std::nan("")});
  }
  char dir_template[] = "/tmp/plimsoll-select-bench-XXXXXX";
  const char* dir = mkdtemp(dir_template);
  std::vector<std::array<double, 3>> theirs(forms.size(), {std::nan(""), std::nan(""), std::nan("")});
  if (dir != nullptr) {
    const std::string data = std::string(dir) + "/y.txt", script = std::string(dir) + "/ref.py";
    {
      std::ofstream out(data);
      out.precision(17);
      for (double v : y) out << v << "\n";
      std::ofstream(script) << kReferenceScript;
    }
    std::string command = "/usr/bin/python3 " + script + " " + data + " " + std::to_string(m);
    for (const std::string& f : forms) command += " '" + f + "'";
    command += " 2>/dev/null";
    if (FILE* pipe = popen(command.c_str(), "r")) {
      char line[512];
      while (fgets(line, sizeof(line), pipe)) {
        std::istringstream in(line);
        std::string form;
        double ms = 0, cpu = 0, llf = 0;
        if (!(in >> form >> ms >> cpu >> llf)) continue;
        for (size_t i = 0; i < forms.size(); ++i) {
          if (forms[i] == form) theirs[i] = {ms, cpu, llf};
        }
      }
      if (pclose(pipe) != 0) report.notes.push_back("reference script failed (statsmodels not importable?)");
    }
    std::remove(data.c_str());
    std::remove(script.c_str());
    rmdir(dir);
  }
  report.rows_key = "per_form";
  for (size_t i = 0; i < forms.size(); ++i) {
    report.rows.push_back({{"form", forms[i]},
                           {"ours_ms", ours[i][0]},
                           {"reference_ms", theirs[i][0]},
                           {"ratio", theirs[i][0] / ours[i][0]},
                           {"ours_cpu_ms", ours[i][1]},
                           {"reference_cpu_ms", theirs[i][1]},
                           {"cpu_ratio", theirs[i][1] / ours[i][1]},
                           {"ours_loglik", ours[i][2]},
                           {"reference_loglik", theirs[i][2]}});
  }
  report.notes.push_back("reference: python3-statsmodels ETSModel(...).fit(), default settings, fit call only");
  return report;
}

PLIMSOLL_BENCH("select", "automatic ETS selection (n=1000, m=24) vs statsmodels single-form fits",
               RunSelectBench);

}  // namespace
}  // namespace plimsoll::bench
