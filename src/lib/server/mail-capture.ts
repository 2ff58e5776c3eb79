import { config } from './config';

export interface CapturedMessage {
  id: string;
  from?: string;
  to?: string;
  subject?: string;
  date?: string;
  text?: string;
}

/** Messages held by the local capture server (demo and tests); undefined when no capture server is set. */
export async function capturedMessages(): Promise<CapturedMessage[] | undefined> {
  const api = config().MAIL_FAKE_API_URL;
  if (!api) return undefined;
  const res = await fetch(new URL('/messages', api), { signal: AbortSignal.timeout(3000) });
  if (!res.ok) throw new Error(`mail capture server answered ${res.status}`);
  const body = (await res.json()) as CapturedMessage[] | { messages: CapturedMessage[] };
  return Array.isArray(body) ? body : body.messages;
}
