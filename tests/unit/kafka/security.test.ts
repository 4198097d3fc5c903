import kafkajs from 'kafkajs';
import { describe, expect, it } from 'vitest';
import { pairflowError } from '../../../src/errors.js';
import { kafkaError } from '../../../src/kafka/client.js';

const { KafkaJSSASLAuthenticationError, KafkaJSConnectionError, KafkaJSNumberOfRetriesExceeded, KafkaJSProtocolError } = kafkajs;
const sasl = { mechanism: 'scram-sha-512', username: 'svc', password: 'do-not-print-me' } as const;

describe('kafkaError()', () => {
  it('a refused SASL login, however deeply kafkajs wrapped it, is PAIRFLOW_ERR_KAFKA_AUTH without the password', () => {
    const inner = new KafkaJSSASLAuthenticationError('SASL SCRAM SHA512 authentication failed: invalid credentials');
    const wrapped = new KafkaJSNumberOfRetriesExceeded(inner, { retryCount: 0, retryTime: 300 });
    const err = kafkaError(wrapped, { brokers: ['b:9093'], security: { sasl } });
    expect(err.code).toBe('PAIRFLOW_ERR_KAFKA_AUTH');
    expect(err.params).toMatchObject({ brokers: 'b:9093', mechanism: 'SCRAM-SHA-512', username: 'svc' });
    expect(err.message).not.toContain(sasl.password);
    expect(err.retriable).toBe(false);
  });

  it('a SASL handshake refused by a listener without SASL is PAIRFLOW_ERR_KAFKA_AUTH', () => {
    const protocol = new KafkaJSProtocolError({ message: 'Request is not valid given the current SASL state', type: 'ILLEGAL_SASL_STATE', code: 34, retriable: false });
    expect(kafkaError(protocol, { brokers: 'b:9092', security: { sasl } }).code).toBe('PAIRFLOW_ERR_KAFKA_AUTH');
  });

  it('a TLS verification failure is PAIRFLOW_ERR_KAFKA_TLS only when TLS was asked for', () => {
    const socketError = Object.assign(new Error('self-signed certificate in certificate chain'), { code: 'SELF_SIGNED_CERT_IN_CHAIN' });
    const conn = new KafkaJSConnectionError(`Connection error: ${socketError.message}`, { broker: 'b:9093', code: socketError.code });
    expect(kafkaError(conn, { brokers: 'b:9093', security: { tls: { ca: 'x' } } }).code).toBe('PAIRFLOW_ERR_KAFKA_TLS');
    expect(kafkaError(conn, { brokers: 'b:9093' }).code).toBe('PAIRFLOW_ERR_KAFKA_CONNECT');
  });

  it('anything else is PAIRFLOW_ERR_KAFKA_CONNECT (retriable); a PairflowError passes through', () => {
    const refused = new KafkaJSConnectionError('Connection error: connect ECONNREFUSED 127.0.0.1:1', { broker: '127.0.0.1:1', code: 'ECONNREFUSED' });
    const err = kafkaError(refused, { brokers: '127.0.0.1:1' });
    expect(err.code).toBe('PAIRFLOW_ERR_KAFKA_CONNECT');
    expect(err.retriable).toBe(true);
    const own = pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--brokers', detail: 'x' });
    expect(kafkaError(own, { brokers: 'x' })).toBe(own);
  });
});
