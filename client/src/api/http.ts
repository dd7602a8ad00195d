// The one place the client talks HTTP: adds the Bearer token, parses JSON, turns {error} into ApiError.
import { saveBlob } from '@/plugins/saveFile';

/** A failed API call; `message` is the server's own {error} text, safe to show. */
export class ApiError extends Error {
  constructor(
    public status: number,
    message: string,
    public details?: unknown,
  ) {
    super(message);
    this.name = 'ApiError';
  }
}

type Query = Record<string, string | number | boolean | undefined | null>;

interface RequestOptions {
  body?: unknown;
  query?: Query;
  signal?: AbortSignal;
}

let tokenSource: () => string | null = () => null;
let onUnauthorized: (message: string) => void = () => {};

/** Wired once by the auth store, so this module depends on nothing above it. */
export function configureHttp(options: { token: () => string | null; unauthorized: (message: string) => void }): void {
  tokenSource = options.token;
  onUnauthorized = options.unauthorized;
}

function withQuery(path: string, query?: Query): string {
  if (!query) return path;
  const params = new URLSearchParams();
  for (const [key, value] of Object.entries(query)) {
    if (value !== undefined && value !== null && value !== '') params.set(key, String(value));
  }
  const text = params.toString();
  return text ? `${path}?${text}` : path;
}

async function request<T>(method: string, path: string, options: RequestOptions = {}): Promise<T> {
  const headers: Record<string, string> = { Accept: 'application/json' };
  const token = tokenSource();
  if (token) headers.Authorization = `Bearer ${token}`;
  if (options.body !== undefined) headers['Content-Type'] = 'application/json';

  let response: Response;
  try {
    response = await fetch(withQuery(path, options.query), {
      method,
      headers,
      body: options.body === undefined ? undefined : JSON.stringify(options.body),
      signal: options.signal,
    });
  } catch (err) {
    if ((err as Error).name === 'AbortError') throw err;
    throw new ApiError(0, 'the server could not be reached; check your connection and try again');
  }

  if (response.status === 204) return undefined as T;
  const payload: unknown = await response.json().catch(() => undefined);
  if (!response.ok) {
    const body = (payload ?? {}) as { error?: unknown; details?: unknown };
    const message = typeof body.error === 'string' ? body.error : `request failed (HTTP ${response.status})`;
    // A 401 on a call that carried a token means the session is over (expired, revoked, tampered).
    if (response.status === 401 && token) onUnauthorized('Your session has ended. Please sign in again.');
    throw new ApiError(response.status, message, body.details);
  }
  return payload as T;
}

export const http = {
  get: <T>(path: string, query?: Query, signal?: AbortSignal) => request<T>('GET', path, { query, signal }),
  post: <T>(path: string, body?: unknown) => request<T>('POST', path, { body: body ?? {} }),
  patch: <T>(path: string, body: unknown) => request<T>('PATCH', path, { body }),
  put: <T>(path: string, body: unknown) => request<T>('PUT', path, { body }),
  delete: <T>(path: string) => request<T>('DELETE', path),
};

/** The message to show for any thrown value. */
export function errorMessage(err: unknown): string {
  if (err instanceof ApiError) return err.message;
  if (err instanceof Error) return err.message;
  return String(err);
}

/** A file the API sends (CSV): fetched with the Bearer token and handed to the browser as a download. */
export async function downloadFile(path: string, filename: string, query?: Query): Promise<void> {
  const token = tokenSource();
  const res = await fetch(withQuery(path, query), { headers: token ? { Authorization: `Bearer ${token}` } : {} });
  if (!res.ok) {
    const body = (await res.json().catch(() => ({}))) as { error?: unknown };
    throw new ApiError(
      res.status,
      typeof body.error === 'string' ? body.error : `download failed (HTTP ${res.status})`,
    );
  }
  saveBlob(await res.blob(), filename);
}
