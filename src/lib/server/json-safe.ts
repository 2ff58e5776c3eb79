/** JSON-safe copy of engine output for a jsonb column: typed arrays → arrays, non-finite numbers → null. */
export function jsonSafe<T>(value: T): T {
  return JSON.parse(
    JSON.stringify(value, (_k, v) => (ArrayBuffer.isView(v) ? Array.from(v as unknown as ArrayLike<number>) : typeof v === 'number' && !Number.isFinite(v) ? null : v)),
  ) as T;
}
