/**
 * Throw-away TLS material for the local broker's SASL_SSL listener and the tests that
 * connect through it: a CA, a server certificate for 127.0.0.1 / localhost and a client
 * certificate, all PEM, made with the `openssl` command (OpenSSL 1.1.1 or 3.x). Nothing
 * here is fit for production: the keys are unencrypted and live two days.
 *
 *   import { generateTlsMaterial } from './scripts/kafka/tls.mjs';
 *   const tls = generateTlsMaterial('/tmp/tls');   // { caFile, serverKeystoreFile, clientCertFile, clientKeyFile, … }
 *
 * The broker reads PEM directly (Kafka's `ssl.keystore.type=PEM`, KIP-651): the server
 * keystore is one file holding the private key (PKCS#8) and the certificate chain.
 */
import { spawnSync } from 'node:child_process';
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';

/** Code of the errors thrown here; the same as scripts/kafka.mjs' broker setup errors. */
const CODE = 'PAIRFLOW_ERR_KAFKA_BROKER_SETUP';

function openssl(args, cwd) {
  const r = spawnSync(process.env.PAIRFLOW_OPENSSL || 'openssl', args, { cwd, encoding: 'utf8' });
  if (r.error || r.status !== 0) {
    const err = new Error(`openssl ${args[0]} failed (${r.error ? r.error.message : `exit ${r.status}`}): ${(r.stderr || '').trim().split('\n').slice(-5).join(' | ')}; install OpenSSL or set PAIRFLOW_OPENSSL`);
    err.code = CODE;
    throw err;
  }
  return r.stdout;
}

/**
 * Writes a CA, a server and a client certificate (EC P-256 keys: quick to make) into
 * `dir` and returns their paths.
 * @param {string} dir
 * @param {{ days?: number, serverNames?: string[], serverIps?: string[] }} [options]
 * @returns {{ dir: string, caFile: string, caKeyFile: string, serverCertFile: string, serverKeyFile: string,
 *   serverKeystoreFile: string, clientCertFile: string, clientKeyFile: string }}
 */
export function generateTlsMaterial(dir, options = {}) {
  const days = String(options.days ?? 2);
  const names = options.serverNames ?? ['localhost'];
  const ips = options.serverIps ?? ['127.0.0.1'];
  mkdirSync(dir, { recursive: true });
  const ecKey = (file) => openssl(['genpkey', '-algorithm', 'EC', '-pkeyopt', 'ec_paramgen_curve:P-256', '-out', file], dir);

  ecKey('ca.key');
  writeFileSync(join(dir, 'ca.ext'), [
    'basicConstraints=critical,CA:TRUE',
    'keyUsage=critical,keyCertSign,cRLSign',
    'subjectKeyIdentifier=hash',
    '',
  ].join('\n'));
  openssl(['req', '-new', '-key', 'ca.key', '-subj', '/CN=pairflow local test CA', '-out', 'ca.csr'], dir);
  openssl(['x509', '-req', '-in', 'ca.csr', '-signkey', 'ca.key', '-days', days, '-sha256', '-extfile', 'ca.ext', '-out', 'ca.pem'], dir);

  const leaf = (name, subject, ext) => {
    ecKey(`${name}.key`);
    writeFileSync(join(dir, `${name}.ext`), `${ext.join('\n')}\n`);
    openssl(['req', '-new', '-key', `${name}.key`, '-subj', subject, '-out', `${name}.csr`], dir);
    openssl(['x509', '-req', '-in', `${name}.csr`, '-CA', 'ca.pem', '-CAkey', 'ca.key', '-CAcreateserial',
      '-days', days, '-sha256', '-extfile', `${name}.ext`, '-out', `${name}.pem`], dir);
    // PKCS#8, the form Kafka's PEM keystore reads.
    openssl(['pkcs8', '-topk8', '-nocrypt', '-in', `${name}.key`, '-out', `${name}.key.pem`], dir);
  };
  const san = [...names.map((n) => `DNS:${n}`), ...ips.map((ip) => `IP:${ip}`)].join(',');
  leaf('server', '/CN=localhost', ['basicConstraints=CA:FALSE', 'keyUsage=critical,digitalSignature', 'extendedKeyUsage=serverAuth', `subjectAltName=${san}`]);
  leaf('client', '/CN=pairflow-client', ['basicConstraints=CA:FALSE', 'keyUsage=critical,digitalSignature', 'extendedKeyUsage=clientAuth']);

  const read = (f) => readFileSync(join(dir, f), 'utf8');
  const keystore = join(dir, 'server.keystore.pem');
  writeFileSync(keystore, `${read('server.key.pem')}${read('server.pem')}${read('ca.pem')}`);
  return {
    dir,
    caFile: join(dir, 'ca.pem'),
    caKeyFile: join(dir, 'ca.key'),
    serverCertFile: join(dir, 'server.pem'),
    serverKeyFile: join(dir, 'server.key.pem'),
    serverKeystoreFile: keystore,
    clientCertFile: join(dir, 'client.pem'),
    clientKeyFile: join(dir, 'client.key.pem'),
  };
}
