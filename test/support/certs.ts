import { execFileSync } from 'node:child_process';
import { chmodSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';

/** A test CA, a broker certificate for 127.0.0.1 and a client certificate, made with openssl. */
export interface TestCerts {
  readonly dir: string;
  readonly caCert: string;
  readonly serverCert: string;
  readonly serverKey: string;
  readonly clientCert: string;
  readonly clientKey: string;
  /** A second CA that signed nothing the broker uses (for "wrong CA" tests). */
  readonly otherCaCert: string;
}

function openssl(dir: string, args: string[]): void {
  execFileSync('openssl', args, { cwd: dir, stdio: ['ignore', 'ignore', 'pipe'] });
}

const EC = ['-newkey', 'ec', '-pkeyopt', 'ec_paramgen_curve:prime256v1', '-nodes'];

export function makeTestCerts(dir: string): TestCerts {
  openssl(dir, [
    'req',
    '-x509',
    ...EC,
    '-keyout',
    'ca.key',
    '-out',
    'ca.crt',
    '-days',
    '2',
    '-subj',
    '/CN=turnwise test CA',
  ]);
  openssl(dir, [
    'req',
    '-x509',
    ...EC,
    '-keyout',
    'other-ca.key',
    '-out',
    'other-ca.crt',
    '-days',
    '2',
    '-subj',
    '/CN=unrelated test CA',
  ]);
  writeFileSync(
    join(dir, 'server.ext'),
    'subjectAltName=IP:127.0.0.1,DNS:localhost\nextendedKeyUsage=serverAuth\n',
  );
  writeFileSync(join(dir, 'client.ext'), 'extendedKeyUsage=clientAuth\n');
  for (const [name, cn] of [
    ['server', '127.0.0.1'],
    ['client', 'turnwise-test-client'],
  ] as const) {
    openssl(dir, [
      'req',
      ...EC,
      '-keyout',
      `${name}.key`,
      '-out',
      `${name}.csr`,
      '-subj',
      `/CN=${cn}`,
    ]);
    openssl(dir, [
      'x509',
      '-req',
      '-in',
      `${name}.csr`,
      '-CA',
      'ca.crt',
      '-CAkey',
      'ca.key',
      '-CAcreateserial',
      '-out',
      `${name}.crt`,
      '-days',
      '2',
      '-extfile',
      `${name}.ext`,
    ]);
  }
  chmodSync(join(dir, 'client.key'), 0o600);
  chmodSync(join(dir, 'server.key'), 0o600);
  return {
    dir,
    caCert: join(dir, 'ca.crt'),
    serverCert: join(dir, 'server.crt'),
    serverKey: join(dir, 'server.key'),
    clientCert: join(dir, 'client.crt'),
    clientKey: join(dir, 'client.key'),
    otherCaCert: join(dir, 'other-ca.crt'),
  };
}
