/**
 * The one fetch client: JSON in and out (or a CSV file up), the session cookie rides along (same origin), and
 * a non-2xx answer becomes an ApiError carrying the server's `{ error: { code, message, fields } }`.
 * What the server's CSRF guard (server/auth/csrf.ts) asks of a signed-in write is what this sends:
 * a body only as application/json or text/csv, and the browser adds `Origin` (every non-GET
 * fetch, Fetch Standard) and `Sec-Fetch-Site` itself; scripts cannot set either, so nothing more.
 */
export class ApiError extends Error {
  constructor(
    public readonly status: number,
    public readonly code: string,
    message: string,
    public readonly fields?: Record<string, string[]>,
  ) {
    super(message);
  }
}

/** Whether an error is a 422 with field errors (shown beside the fields, not as a whole). */
export function hasFieldErrors(error: unknown): boolean {
  return error instanceof ApiError && !!error.fields && Object.keys(error.fields).length > 0;
}

export async function api<T>(url: string, init: { method?: string; body?: unknown; csv?: string; signal?: AbortSignal } = {}): Promise<T> {
  // A JSON body, or a CSV file sent as it is (text/csv uploads).
  const sending = init.csv !== undefined ? 'text/csv' : init.body !== undefined ? 'application/json' : null;
  const res = await fetch(url, {
    method: init.method ?? (sending ? 'POST' : 'GET'),
    headers: sending ? { Accept: 'application/json', 'Content-Type': sending } : { Accept: 'application/json' },
    body: init.csv ?? (init.body === undefined ? undefined : JSON.stringify(init.body)),
    credentials: 'same-origin',
    signal: init.signal,
  });
  const text = await res.text();
  const data = text ? safeJson(text) : undefined;
  if (!res.ok) {
    const e = (data as { error?: { code?: string; message?: string; fields?: Record<string, string[]> } } | undefined)?.error;
    throw new ApiError(res.status, e?.code ?? 'http_error', e?.message ?? `${res.status} ${res.statusText}`, e?.fields);
  }
  return data as T;
}

function safeJson(text: string): unknown {
  try {
    return JSON.parse(text);
  } catch {
    return { error: { code: 'bad_response', message: 'the server answered with something that is not JSON' } };
  }
}
