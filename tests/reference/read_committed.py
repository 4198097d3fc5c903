"""Reads a topic with a Kafka client that is not pairflow's (confluent-kafka, i.e.
librdkafka), isolation level read_committed, from the beginning to the end offsets it
had when the read began, and prints what it saw as one JSON object on stdout:

    {"records": N, "perPartition": {...}, "values": [...]}   (values as text)

Used by tests/integration/live.test.ts to check that an outside reader sees exactly the
assignments `pairflow summarize` reports. Never imports pairflow code.

usage: read_committed.py BROKERS TOPIC [read_committed|read_uncommitted]
"""
import json
import sys
import time
import uuid

from confluent_kafka import Consumer, TopicPartition


def main() -> None:
    brokers, topic = sys.argv[1], sys.argv[2]
    isolation = sys.argv[3] if len(sys.argv) > 3 else "read_committed"
    c = Consumer({
        "bootstrap.servers": brokers,
        "group.id": f"pairflow-outside-{uuid.uuid4()}",
        "isolation.level": isolation,
        "enable.auto.commit": False,
        "auto.offset.reset": "earliest",
    })
    meta = c.list_topics(topic, timeout=30)
    partitions = sorted(meta.topics[topic].partitions.keys())
    ends = {}
    for p in partitions:
        low, high = c.get_watermark_offsets(TopicPartition(topic, p), timeout=30)
        ends[p] = high
    c.assign([TopicPartition(topic, p, 0) for p in partitions])
    values = []
    per = {p: 0 for p in partitions}
    deadline = time.time() + 120
    while True:
        done = True
        for tp in c.position([TopicPartition(topic, p) for p in partitions]):
            # librdkafka's position moves past control records (commit markers) too.
            if ends[tp.partition] > 0 and (tp.offset < 0 or tp.offset < ends[tp.partition]):
                done = False
        if done:
            break
        if time.time() > deadline:
            raise SystemExit(f"read_committed.py: {topic} not read to its end within 120 s")
        msg = c.poll(0.5)
        if msg is None:
            continue
        if msg.error():
            raise SystemExit(f"read_committed.py: {msg.error()}")
        if msg.offset() >= ends[msg.partition()]:
            continue
        per[msg.partition()] += 1
        values.append(msg.value().decode("utf-8"))
    c.close()
    print(json.dumps({"records": len(values), "perPartition": per, "values": values}))


if __name__ == "__main__":
    main()
