import { Writable } from 'node:stream';
import { describe, expect, it } from 'vitest';
import kafkajs from 'kafkajs';
import { pino } from 'pino';
import { createKafka, kafkaLogLevelFor, marketPartitioner, parseBrokers, pinoLogCreator } from '../../../src/kafka/client.js';

const { logLevel } = kafkajs;

/** A real pino logger writing JSON lines into an array. */
function capture(level = 'debug') {
  const lines: Array<Record<string, unknown>> = [];
  const stream = new Writable({
    write(chunk: Buffer, _enc, cb) {
      for (const l of chunk.toString().split('\n')) if (l) lines.push(JSON.parse(l) as Record<string, unknown>);
      cb();
    },
  });
  return { logger: pino({ level }, stream), lines };
}

describe('parseBrokers()', () => {
  it('splits a comma list, trims, and keeps bracketed IPv6 hosts', () => {
    expect(parseBrokers(' 127.0.0.1:9092, kafka-1:19092 ,')).toEqual(['127.0.0.1:9092', 'kafka-1:19092']);
    expect(parseBrokers(['[::1]:9092'])).toEqual(['[::1]:9092']);
  });

  it('rejects entries that are not HOST:PORT with PAIRFLOW_ERR_CLI_OPTION', () => {
    for (const bad of ['', ' , ', 'localhost', ':9092', 'h:0', 'h:65536', 'h:9o92', 'h:']) {
      expect(() => parseBrokers(bad), JSON.stringify(bad)).toThrowError(expect.objectContaining({ code: 'PAIRFLOW_ERR_CLI_OPTION' }));
    }
  });
});

describe('kafkaLogLevelFor()', () => {
  it('maps pino levels to the kafkajs level that emits the same lines', () => {
    expect(kafkaLogLevelFor('trace')).toBe(logLevel.DEBUG);
    expect(kafkaLogLevelFor('debug')).toBe(logLevel.DEBUG);
    expect(kafkaLogLevelFor('info')).toBe(logLevel.INFO);
    expect(kafkaLogLevelFor('warn')).toBe(logLevel.WARN);
    expect(kafkaLogLevelFor('error')).toBe(logLevel.ERROR);
    expect(kafkaLogLevelFor('fatal')).toBe(logLevel.ERROR);
    expect(kafkaLogLevelFor('silent')).toBe(logLevel.NOTHING);
  });
});

describe('pinoLogCreator()', () => {
  it('writes each kafkajs entry as one pino line with its level, namespace and extra fields', () => {
    const { logger, lines } = capture();
    const log = pinoLogCreator(logger)!(logLevel.DEBUG);
    log({ namespace: 'Connection', level: logLevel.ERROR, label: 'ERROR', log: { timestamp: 'x', message: 'broken pipe', broker: 'b:1' } });
    log({ namespace: 'Consumer', level: logLevel.WARN, label: 'WARN', log: { timestamp: 'x', message: 'rebalancing', groupId: 'g' } });
    log({ namespace: 'Producer', level: logLevel.INFO, label: 'INFO', log: { timestamp: 'x', message: 'ready' } });
    log({ namespace: 'Admin', level: logLevel.DEBUG, label: 'DEBUG', log: { timestamp: 'x', message: 'request' } });
    // pino's numeric levels: error 50, warn 40, info 30, debug 20 (pino documentation).
    expect(lines.map((l) => [l.level, l.msg, l.kafka])).toEqual([
      [50, 'broken pipe', 'Connection'],
      [40, 'rebalancing', 'Consumer'],
      [30, 'ready', 'Producer'],
      [20, 'request', 'Admin'],
    ]);
    expect(lines[0]?.broker).toBe('b:1');
    expect(lines[1]?.groupId).toBe('g');
    expect(lines.every((l) => !('timestamp' in l))).toBe(true);
  });
});

describe('createKafka()', () => {
  it('routes the client logger into pino at the logger level, without connecting', () => {
    const { logger, lines } = capture('warn');
    const kafka = createKafka({ brokers: '127.0.0.1:1', clientId: 'unit', logger });
    kafka.logger().warn('from kafkajs', { topic: 't' });
    kafka.logger().info('below the level');
    expect(lines).toHaveLength(1);
    expect(lines[0]).toMatchObject({ level: 40, msg: 'from kafkajs', topic: 't' });
  });

  it('checks the broker list before building a client', () => {
    expect(() => createKafka({ brokers: 'nope' })).toThrowError(expect.objectContaining({ code: 'PAIRFLOW_ERR_CLI_OPTION' }));
  });
});

describe('marketPartitioner', () => {
  it('sends every record of a market to one partition and spreads markets over partitions', () => {
    const partition = marketPartitioner();
    const partitionMetadata = [0, 1, 2, 3].map((p) => ({ partitionId: p, leader: 1, replicas: [1], isr: [1], partitionErrorCode: 0 }));
    const markets = Array.from({ length: 24 }, (_, i) => `market-${i}`);
    const chosen = new Set<number>();
    for (const market of markets) {
      const first = partition({ topic: 't', partitionMetadata, message: { key: market, value: 'a' } });
      for (let k = 0; k < 5; k++) {
        expect(partition({ topic: 't', partitionMetadata, message: { key: market, value: `v${k}` } }), market).toBe(first);
      }
      chosen.add(first);
    }
    expect(chosen.size).toBeGreaterThan(1);
  });
});
