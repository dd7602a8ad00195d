/**
 * Polls `get` until `ok` holds or `timeoutMs` passes. A slow or refused answer on a loaded machine is not the end of
 * the wait: errors are retried until the deadline. On time-out the error names what was awaited, the last value and
 * whatever `context` adds (e.g. the tail of a child process's output).
 */
export async function until<T>(
  what: string,
  get: () => Promise<T> | T,
  ok: (v: T) => boolean,
  timeoutMs: number,
  stepMs = 100,
  context?: () => string,
): Promise<T> {
  const deadline = Date.now() + timeoutMs;
  let last: T | undefined;
  while (Date.now() < deadline) {
    try {
      last = await get();
      if (ok(last)) return last;
    } catch {
      /* retried until the deadline */
    }
    await new Promise((r) => setTimeout(r, stepMs));
  }
  throw new Error(`timed out waiting for ${what} (last: ${JSON.stringify(last)})${context ? `:\n${context()}` : ''}`);
}
