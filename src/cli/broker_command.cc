// `plimsoll broker`: runs the embedded broker (librdkafka's in-process mock cluster) for local
// work until SIGINT/SIGTERM. In memory only.
#include <signal.h>

#include <spdlog/sinks/stdout_color_sinks.h>
#include <spdlog/spdlog.h>

#include <CLI/CLI.hpp>
#include <cstdio>
#include <iostream>
#include <string>
#include <vector>

#include "cli/commands.h"
#include "plimsoll/kafka/embedded_broker.h"
#include "plimsoll/kafka/kafka_sink.h"

namespace plimsoll::cli {
namespace {

struct BrokerFlags {
  int brokers = 1;
  int partitions = 4;
  std::vector<std::string> topics;
  std::string address_file;
};

int RunBroker(const BrokerFlags& flags) {
  // Block the signals before librdkafka starts its threads, so they inherit the mask and the
  // signal reaches sigwait below instead of killing the process mid-write.
  sigset_t signals;
  sigemptyset(&signals);
  sigaddset(&signals, SIGINT);
  sigaddset(&signals, SIGTERM);
  pthread_sigmask(SIG_BLOCK, &signals, nullptr);
  // stdout carries only the bootstrap address, so scripts can read it; logs go to stderr.
  spdlog::set_default_logger(spdlog::stderr_color_mt("broker"));

  kafka::EmbeddedBrokerOptions options;
  options.brokers = flags.brokers;
  options.address_file = flags.address_file;
  std::vector<std::string> names = flags.topics;
  if (names.empty()) {
    names.push_back("plimsoll.observations");
    for (const std::string& topic : kafka::KafkaSinkOptions{}.topics) names.push_back(topic);
  }
  for (const std::string& name : names) options.topics.push_back({name, flags.partitions});
  auto broker = kafka::EmbeddedBroker::Start(options);
  if (!broker.ok()) {
    std::cerr << "plimsoll broker: " << broker.status().ToString() << "\n";
    return 1;
  }
  std::cout << (*broker)->BootstrapServers() << std::endl;
  std::cerr << "plimsoll broker: " << flags.brokers << " broker(s) at " << (*broker)->BootstrapServers()
            << "; topics:";
  for (const std::string& name : names) std::cerr << ' ' << name << '(' << flags.partitions << ')';
  std::cerr << "\nplimsoll broker: IN MEMORY ONLY: everything is lost when it stops, and each partition keeps "
               "only about 5 MiB (oldest dropped silently). Stop with Ctrl-C or SIGTERM.\n";
  int received = 0;
  sigwait(&signals, &received);
  std::cerr << "plimsoll broker: stopping (signal " << received << ")\n";
  broker->reset();
  if (!flags.address_file.empty()) std::remove(flags.address_file.c_str());
  return 0;
}

void AddBrokerVerb(CLI::App& app, CommandContext& context) {
  auto flags = std::make_shared<BrokerFlags>();
  CLI::App* verb = app.add_subcommand(
      "broker",
      "Start the embedded broker (an in-process Kafka-protocol cluster on loopback) for local work and print "
      "its bootstrap address. In memory only: data is lost when it stops; about 5 MiB kept per partition.");
  verb->add_option("--brokers", flags->brokers, "brokers in the cluster (1..16)")->default_val(1);
  verb->add_option("--partitions", flags->partitions, "partitions per created topic")->default_val(4);
  verb->add_option("--topic", flags->topics,
                   "topic to create before clients connect (repeatable; default: plimsoll.observations and "
                   "the output topics)");
  verb->add_option("--address-file", flags->address_file,
                   "write the bootstrap address to this file (removed on exit); ports change on every start");
  verb->callback([flags, &context] { context.exit_code = RunBroker(*flags); });
}

PLIMSOLL_REGISTER_VERB(AddBrokerVerb);

}  // namespace
}  // namespace plimsoll::cli
