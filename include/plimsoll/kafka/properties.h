#pragma once
// librdkafka properties: our safe defaults for consumers and producers, and the merge of a
// user's pass-through table (librdkafka's own property names, e.g. from [source.kafka]) over them.
//
// Thread-safety: pure functions over values.

#include <cstdint>
#include <map>
#include <string>
#include <string_view>

#include "plimsoll/base/status.h"
#include "plimsoll/kafka/handles.h"

namespace plimsoll::kafka {

// librdkafka property name -> value, both as librdkafka spells them. Ordered, so logs and
// errors list properties in a stable order.
using Properties = std::map<std::string, std::string, std::less<>>;

// Our consumer defaults (see /work/notes/kafka-docs.md for why each one):
// enable.auto.commit=false, enable.auto.offset.store=false (positions live in our store; Kafka
// commits are advisory and made by Acknowledge), partition.assignment.strategy=range (eager;
// cooperative-sticky misbehaves on the embedded broker), auto.offset.reset=error (a stored
// position that fell out of retention is reported, never skipped silently),
// session.timeout.ms=10000, heartbeat.interval.ms=3000, enable.partition.eof=false,
// client.id=plimsoll, log.connection.close=false.
Properties ConsumerDefaults();

// Our producer defaults: enable.idempotence=true (acks=all, ordered, no duplicates from
// retries), compression.type=zstd, linger.ms=5, partitioner=murmur2_random (same partition
// for a key as the Java clients), message.timeout.ms=30000,
// queue.buffering.max.messages=100000, client.id=plimsoll-sink, log.connection.close=false.
Properties ProducerDefaults();

// Returns `defaults` with every entry of `overrides` replacing or adding to it.
Properties MergeProperties(const Properties& defaults, const Properties& overrides);

enum class ClientRole : uint8_t { kConsumer, kProducer };

// `properties` without the keys librdkafka's own property table (rd_kafka_conf_properties_show,
// column C/P) marks as meaningful for the other role only, so one pass-through table such as
// [source.kafka] can configure both the consumer and the sink without librdkafka warning about
// every consumer key on the producer. Keys valid for both roles and unknown keys stay (unknown
// ones are then rejected by BuildConf, naming the key).
Properties ForRole(const Properties& properties, ClientRole role);

// Checks the keys this module relies on: a consumer must not enable auto commit or auto offset
// store or use the cooperative assignor; a producer must keep enable.idempotence=true.
// InvalidArgument naming the key and the reason. `consumer` selects which rules apply.
Status ValidateProperties(const Properties& properties, bool consumer);

// Builds a librdkafka conf from `properties`. InvalidArgument naming the first key librdkafka
// rejects (unknown name or bad value) and its reason.
Result<KafkaConf> BuildConf(const Properties& properties);

// "a=1, b=2" for logs; values of keys containing "password", "secret" or "jaas" print as "***".
std::string DescribeProperties(const Properties& properties);

}  // namespace plimsoll::kafka
