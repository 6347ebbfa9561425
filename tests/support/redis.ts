import { randomBytes } from 'node:crypto';
import { connect } from 'node:net';

/** The Redis the region tests use: TEST_REDIS_URL, or the one CI starts on loopback. */
export const testRedisUrl = process.env.TEST_REDIS_URL || 'redis://127.0.0.1:56379';

/** A key prefix of a test's own, so test runs sharing one Redis never hear each other. */
export const testRedisPrefix = () => `plumbline-test-${randomBytes(6).toString('hex')}`;

/** Why the tests cannot use Redis at `url` (no answer to PING within 1 s), or null when they can. */
export function redisUnavailable(url = testRedisUrl): Promise<string | null> {
  const { hostname, port } = new URL(url);
  return new Promise((resolve) => {
    const socket = connect({ host: hostname || '127.0.0.1', port: Number(port || 6379) });
    const done = (why: string | null) => {
      clearTimeout(timer);
      socket.destroy();
      resolve(why);
    };
    const timer = setTimeout(() => done(`no Redis answered at ${url} within 1 s (set TEST_REDIS_URL)`), 1000);
    socket.once('error', (err) => done(`no Redis at ${url} (${err.message}; set TEST_REDIS_URL)`));
    socket.once('connect', () => socket.write('PING\r\n'));
    socket.once('data', (data) => done(data.toString().startsWith('+PONG') ? null : `${url} did not answer PING as Redis does`));
  });
}
