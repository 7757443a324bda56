// plimsoll-bench NAME [--json] [--quick] | plimsoll-bench list
#include <spdlog/sinks/stdout_color_sinks.h>
#include <spdlog/spdlog.h>

#include <algorithm>
#include <cstdio>
#include <cstring>
#include <iostream>
#include <map>
#include <string>

#include "bench/bench.h"
#include "plimsoll/base/json_writer.h"

namespace plimsoll::bench {
namespace {

struct Entry {
  std::string description;
  BenchFn fn;
};

std::map<std::string, Entry>& Registry() {
  static std::map<std::string, Entry> registry;
  return registry;
}

void WriteValue(JsonWriter& w, const BenchValue& v) {
  if (auto d = std::get_if<double>(&v)) w.Number(*d);
  else if (auto i = std::get_if<int64_t>(&v)) w.Integer(*i);
  else w.String(std::get<std::string>(v));
}

std::string ValueText(const BenchValue& v) {
  if (auto d = std::get_if<double>(&v)) {
    char buf[64];
    std::snprintf(buf, sizeof(buf), "%.6g", *d);
    return buf;
  }
  if (auto i = std::get_if<int64_t>(&v)) return std::to_string(*i);
  return std::get<std::string>(v);
}

void PrintJson(const std::string& name, const BenchReport& report) {
  JsonWriter w;
  w.BeginObject().Field("bench", name);
  for (const auto& [key, value] : report.figures) WriteValue(w.Key(key), value);
  if (!report.rows.empty()) {
    w.Key(report.rows_key).BeginArray();
    for (const auto& row : report.rows) {
      w.BeginObject();
      for (const auto& [key, value] : row) WriteValue(w.Key(key), value);
      w.EndObject();
    }
    w.EndArray();
  }
  w.EndObject();
  std::cout << w.str() << "\n";
  for (const auto& note : report.notes) std::cerr << "note: " << note << "\n";
}

void PrintTable(const std::string& name, const BenchReport& report) {
  std::cout << "benchmark: " << name << "\n";
  for (const auto& [key, value] : report.figures) std::cout << "  " << key << ": " << ValueText(value) << "\n";
  if (!report.rows.empty()) {
    const BenchFields& header = report.rows.front();
    std::vector<size_t> width;
    for (const auto& [key, value] : header) width.push_back(key.size());
    for (const auto& row : report.rows)
      for (size_t i = 0; i < row.size() && i < width.size(); ++i)
        width[i] = std::max(width[i], ValueText(row[i].second).size());
    std::cout << "\n";
    for (size_t i = 0; i < header.size(); ++i)
      std::cout << (i ? "  " : "") << std::string(width[i] - header[i].first.size(), ' ') << header[i].first;
    std::cout << "\n";
    for (const auto& row : report.rows) {
      for (size_t i = 0; i < row.size() && i < width.size(); ++i) {
        std::string text = ValueText(row[i].second);
        std::cout << (i ? "  " : "") << std::string(width[i] - text.size(), ' ') << text;
      }
      std::cout << "\n";
    }
  }
  for (const auto& note : report.notes) std::cout << "note: " << note << "\n";
}

int Usage() {
  std::cerr << "usage: plimsoll-bench NAME [--json] [--quick]\n       plimsoll-bench list\n";
  return 2;
}

}  // namespace

bool RegisterBench(std::string name, std::string description, BenchFn fn) {
  Registry()[std::move(name)] = Entry{std::move(description), std::move(fn)};
  return true;
}

}  // namespace plimsoll::bench

int main(int argc, char** argv) {
  using namespace plimsoll::bench;
  // Logs of the code under measurement go to stderr: stdout carries the report (one JSON object).
  spdlog::set_default_logger(spdlog::stderr_color_mt("bench"));
  if (argc < 2) return Usage();
  std::string name = argv[1];
  if (name == "list") {
    for (const auto& [n, entry] : Registry()) std::cout << n << "\t" << entry.description << "\n";
    return 0;
  }
  BenchArgs args;
  for (int i = 2; i < argc; ++i) {
    if (std::strcmp(argv[i], "--json") == 0) args.json = true;
    else if (std::strcmp(argv[i], "--quick") == 0) args.quick = true;
    else return Usage();
  }
  auto it = Registry().find(name);
  if (it == Registry().end()) {
    std::cerr << "plimsoll-bench: no benchmark named '" << name << "' (try: plimsoll-bench list)\n";
    return 2;
  }
  BenchReport report = it->second.fn(args);
  if (args.json) PrintJson(name, report);
  else PrintTable(name, report);
  return 0;
}
