/** Reads `what` until `ok` holds, every 50 ms, for at most `ms`; the last value is in the failure. */
export async function until<T>(what: () => T | Promise<T>, ok: (value: T) => boolean, ms = 5000): Promise<T> {
  const end = Date.now() + ms;
  for (;;) {
    const value = await what();
    if (ok(value)) return value;
    if (Date.now() > end) throw new Error(`timed out after ${ms} ms; last value ${JSON.stringify(value)}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}
