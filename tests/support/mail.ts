/** Read what the local capture SMTP server received (MAIL_FAKE_API_URL, started by scripts/test.mjs). */
export interface Captured {
  id: string;
  from?: string;
  to?: string;
  subject?: string;
  date?: string;
  text?: string;
}

export async function capturedMail(): Promise<Captured[]> {
  const res = await fetch(new URL('/messages', process.env.MAIL_FAKE_API_URL));
  const body = await res.json();
  return Array.isArray(body) ? body : body.messages;
}

/** Wait until a message to `to` matching `subject` arrives (the outbox sender runs every second). */
export async function waitForMail(to: string, subject: RegExp, timeoutMs = 20_000): Promise<Captured> {
  const until = Date.now() + timeoutMs;
  for (;;) {
    const hit = (await capturedMail()).find((m) => (m.to ?? '').toLowerCase().includes(to.toLowerCase()) && subject.test(m.subject ?? ''));
    if (hit) return hit;
    if (Date.now() > until) throw new Error(`no mail to ${to} matching ${subject} within ${timeoutMs} ms`);
    await new Promise((r) => setTimeout(r, 300));
  }
}
