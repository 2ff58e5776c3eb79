/** Structured JSON logs, one object per line on stdout (stderr for errors). */
export type Level = 'debug' | 'info' | 'warn' | 'error';

const quiet = process.env.OFFSETRY_LOG === 'silent';
const minLevel: Level = (process.env.OFFSETRY_LOG_LEVEL as Level) ?? 'info';
const order: Record<Level, number> = { debug: 10, info: 20, warn: 30, error: 40 };

export function log(level: Level, msg: string, fields: Record<string, unknown> = {}) {
  if (quiet || order[level] < order[minLevel]) return;
  const line = JSON.stringify({ time: new Date().toISOString(), level, msg, ...fields });
  if (level === 'error') process.stderr.write(line + '\n');
  else process.stdout.write(line + '\n');
}
