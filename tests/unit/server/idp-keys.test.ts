import { mkdtempSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { localIdpPublicKeys } from '../../../server/idp/provider';

describe("the built-in identity provider's key file", () => {
  const dirs: string[] = [];
  const dataDir = () => {
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-keys-'));
    dirs.push(dir);
    return dir;
  };
  afterEach(() => {
    for (const dir of dirs.splice(0)) rmSync(dir, { recursive: true, force: true });
  });

  it('is made once, readable only by its owner, and only its public half is handed out', () => {
    const dir = dataDir();
    const first = localIdpPublicKeys(dir);
    expect(first.keys).toHaveLength(1);
    const [key] = first.keys;
    expect(Object.keys(key).sort()).toEqual(['alg', 'e', 'kid', 'kty', 'n', 'use']);
    expect([key.kty, key.alg, key.use]).toEqual(['RSA', 'RS256', 'sig']);
    // The file keeps the private part for the provider; the key set given out has none of it.
    const file = JSON.parse(readFileSync(join(dir, 'idp-signing-key.json'), 'utf8')) as { keys: Array<Record<string, unknown>> };
    expect(typeof file.keys[0].d).toBe('string');
    expect(statSync(join(dir, 'idp-signing-key.json')).mode & 0o777).toBe(0o600);
    expect(localIdpPublicKeys(dir)).toEqual(first);
  });

  it('refuses a key file it did not write, naming the file and the field, and leaves the file as it was', () => {
    const dir = dataDir();
    const file = join(dir, 'idp-signing-key.json');
    const tampered = JSON.stringify({ keys: [{ kty: 'RSA', n: 'x', e: 'AQAB', kid: 'k1', alg: 'none', use: 'sig', d: 'y' }] });
    writeFileSync(file, tampered);
    expect(() => localIdpPublicKeys(dir)).toThrow(/idp-signing-key\.json is not a key file this server wrote \(keys\[0\]\.alg: /);
    expect(readFileSync(file, 'utf8')).toBe(tampered);

    writeFileSync(file, '{"keys": [');
    expect(() => localIdpPublicKeys(dir)).toThrow(/is not a key file this server wrote/);
  });
});
