import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';

/**
 * A throw-away self-signed certificate for 127.0.0.1, made with the system's openssl into a
 * fresh temporary directory (valid one day; the key never leaves that directory).
 */
export interface SelfSigned {
  cert: string;
  key: string;
  /** The certificate's PEM text, to trust it as a CA in a client. */
  pem: string;
}

export function makeSelfSignedCertificate(): SelfSigned {
  const dir = mkdtempSync(path.join(os.tmpdir(), 'sparsewire-tls-'));
  const cert = path.join(dir, 'cert.pem');
  const key = path.join(dir, 'key.pem');
  execFileSync(
    'openssl',
    ['req', '-x509', '-newkey', 'rsa:2048', '-nodes', '-keyout', key, '-out', cert, '-days', '1', '-subj', '/CN=127.0.0.1', '-addext', 'subjectAltName=IP:127.0.0.1'],
    { stdio: 'ignore' },
  );
  return { cert, key, pem: readFileSync(cert, 'utf8') };
}
