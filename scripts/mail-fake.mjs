#!/usr/bin/env node
// Capture SMTP server for local runs and tests: accepts every message on loopback (no TLS, any or no login),
// keeps it as a raw .eml with one JSON line in index.jsonl, and serves the captured mail as JSON.
//
// Usage: node scripts/mail-fake.mjs [--host 127.0.0.1] [--smtp-port 54331] [--api-port 54332] [--dir .data/mail]
// (each also from MAIL_FAKE_HOST, SMTP_PORT, MAIL_FAKE_API_PORT, MAIL_FAKE_DIR).
// API: GET /messages (newest first) · GET /messages/:id · GET /messages/:id/raw · DELETE /messages · GET /health
import crypto from 'node:crypto';
import fs from 'node:fs';
import http from 'node:http';
import path from 'node:path';
import { parseArgs } from 'node:util';
import { simpleParser } from 'mailparser';
import { SMTPServer } from 'smtp-server';

const { values } = parseArgs({
  options: {
    host: { type: 'string', default: process.env.MAIL_FAKE_HOST ?? '127.0.0.1' },
    'smtp-port': { type: 'string', default: process.env.SMTP_PORT ?? '54331' },
    'api-port': { type: 'string', default: process.env.MAIL_FAKE_API_PORT ?? '54332' },
    dir: { type: 'string', default: process.env.MAIL_FAKE_DIR ?? '.data/mail' },
  },
});

/** @param {string} name @param {string} value */
function portOption(name, value) {
  const port = Number.parseInt(value, 10);
  if (!Number.isInteger(port) || port <= 0 || port > 65535 || String(port) !== value.trim()) {
    console.error(`mail-fake: --${name} must be a TCP port, got "${value}"`);
    process.exit(2);
  }
  return port;
}

const host = values.host;
const smtpPort = portOption('smtp-port', values['smtp-port']);
const apiPort = portOption('api-port', values['api-port']);
const dir = path.resolve(values.dir);
const indexFile = path.join(dir, 'index.jsonl');
const MAX_MESSAGE_BYTES = 25 * 1024 * 1024;
fs.mkdirSync(dir, { recursive: true });

/**
 * to: the envelope recipients joined with ", " (Bcc included); recipients: the same as a list.
 * @typedef {{ id: string, from: string, to: string, recipients: string[], subject: string, date: string, size: number }} IndexEntry
 * @typedef {IndexEntry & { text: string, html: string | null }} MessageView
 */

/** @type {IndexEntry[]} oldest first */
let index = loadIndex();

function loadIndex() {
  if (!fs.existsSync(indexFile)) return [];
  /** @type {IndexEntry[]} */
  const entries = [];
  for (const [n, line] of fs.readFileSync(indexFile, 'utf8').split('\n').entries()) {
    if (!line.trim()) continue;
    try {
      const entry = JSON.parse(line);
      if (fs.existsSync(emlPath(entry.id))) entries.push(entry);
    } catch {
      console.error(`mail-fake: ${indexFile} line ${n + 1}: not JSON, skipped`);
    }
  }
  return entries;
}

/** @param {string} id */
function emlPath(id) {
  return path.join(dir, `${id}.eml`);
}

// ---- parsing: mailparser (a devDependency; every install of this repository has it) ---------------------

/**
 * Subject, From, the text part and the HTML part of a raw RFC 5322 message.
 * @param {Buffer} raw
 * @returns {Promise<{ subject: string, from: string, text: string, html: string | null }>}
 */
async function parseMessage(raw) {
  const mail = await simpleParser(raw, { skipImageLinks: true });
  return {
    subject: mail.subject ?? '',
    from: mail.from?.text ?? '',
    text: mail.text ?? '',
    html: typeof mail.html === 'string' ? mail.html : null,
  };
}

// ---- SMTP -------------------------------------------------------------------------------------------------

const smtp = new SMTPServer({
  name: 'mail-fake.offsetry.local',
  banner: 'Offsetry mail capture (loopback only, nothing is delivered)',
  secure: false,
  disabledCommands: ['STARTTLS'],
  authOptional: true,
  // Any login is accepted on plain text (a real relay's credentials in .env must not make the fake refuse).
  allowInsecureAuth: true,
  size: MAX_MESSAGE_BYTES,
  logger: false,
  onAuth(auth, _session, callback) {
    callback(null, { user: auth.username ?? 'anonymous' });
  },
  onData(stream, session, callback) {
    /** @type {Buffer[]} */
    const chunks = [];
    stream.on('data', (chunk) => chunks.push(chunk));
    stream.on('error', (error) => callback(error));
    stream.on('end', async () => {
      if (stream.sizeExceeded) {
        const error = Object.assign(new Error(`message larger than ${MAX_MESSAGE_BYTES} bytes`), { responseCode: 552 });
        callback(error);
        return;
      }
      try {
        const raw = Buffer.concat(chunks);
        const parsed = await parseMessage(raw);
        const envelopeFrom = session.envelope.mailFrom ? session.envelope.mailFrom.address : '';
        const recipients = session.envelope.rcptTo.map((r) => r.address);
        /** @type {IndexEntry} */
        const entry = {
          id: `${Date.now().toString(36)}-${crypto.randomBytes(4).toString('hex')}`,
          from: parsed.from || envelopeFrom,
          to: recipients.join(', '),
          recipients,
          subject: parsed.subject,
          date: new Date().toISOString(),
          size: raw.length,
        };
        fs.writeFileSync(emlPath(entry.id), raw);
        fs.appendFileSync(indexFile, `${JSON.stringify(entry)}\n`);
        index.push(entry);
        console.log(`mail-fake: captured ${entry.id} to ${entry.to}: ${entry.subject}`);
        callback(null, `captured as ${entry.id}`);
      } catch (error) {
        callback(error instanceof Error ? error : new Error(String(error)));
      }
    });
  },
});
smtp.on('error', (error) => console.error(`mail-fake: SMTP error: ${error.message}`));

// ---- JSON API ---------------------------------------------------------------------------------------------

/** @param {IndexEntry} entry @returns {Promise<MessageView>} */
async function view(entry) {
  const parsed = await parseMessage(fs.readFileSync(emlPath(entry.id)));
  return { ...entry, text: parsed.text, html: parsed.html };
}

/**
 * @param {http.ServerResponse} res
 * @param {number} status
 * @param {unknown} body
 */
function sendJson(res, status, body) {
  const text = JSON.stringify(body);
  res.writeHead(status, { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store' });
  res.end(text);
}

const api = http.createServer(async (req, res) => {
  try {
    const url = new URL(req.url ?? '/', `http://${host}`);
    const parts = url.pathname.split('/').filter(Boolean);
    if (req.method === 'GET' && url.pathname === '/health') {
      sendJson(res, 200, { ok: true, service: 'offsetry-mail-fake', messages: index.length, smtpPort });
      return;
    }
    if (parts[0] !== 'messages' || parts.length > 3) {
      sendJson(res, 404, { error: `no such endpoint: ${req.method} ${url.pathname}` });
      return;
    }
    if (parts.length === 1) {
      if (req.method === 'GET') {
        const newestFirst = [...index].reverse();
        sendJson(res, 200, await Promise.all(newestFirst.map(view)));
        return;
      }
      if (req.method === 'DELETE') {
        const count = index.length;
        for (const entry of index) fs.rmSync(emlPath(entry.id), { force: true });
        index = [];
        fs.writeFileSync(indexFile, '');
        sendJson(res, 200, { deleted: count });
        return;
      }
      sendJson(res, 405, { error: `${req.method} is not supported on /messages (GET, DELETE)` });
      return;
    }
    const entry = index.find((e) => e.id === parts[1]);
    if (!entry) {
      sendJson(res, 404, { error: `no captured message with id "${parts[1]}"` });
      return;
    }
    if (req.method !== 'GET') {
      sendJson(res, 405, { error: `${req.method} is not supported on /messages/:id (GET)` });
      return;
    }
    if (parts.length === 2) {
      sendJson(res, 200, await view(entry));
      return;
    }
    if (parts[2] === 'raw') {
      const raw = fs.readFileSync(emlPath(entry.id));
      res.writeHead(200, { 'content-type': 'message/rfc822', 'content-length': raw.length });
      res.end(raw);
      return;
    }
    sendJson(res, 404, { error: `no such endpoint: ${req.method} ${url.pathname}` });
  } catch (error) {
    sendJson(res, 500, { error: error instanceof Error ? error.message : String(error) });
  }
});

/** @param {{ listen: Function, once: Function }} server @param {number} port @param {string} what */
function listen(server, port, what) {
  return new Promise((resolve, reject) => {
    server.once('error', (/** @type {Error} */ error) => reject(new Error(`${what} on ${host}:${port}: ${error.message}`)));
    server.listen(port, host, () => resolve(undefined));
  });
}

try {
  await listen(smtp, smtpPort, 'SMTP');
  await listen(api, apiPort, 'HTTP API');
  console.log(
    `mail-fake ready smtp://${host}:${smtpPort} api=http://${host}:${apiPort} dir=${dir}` +
      ` (${index.length} stored)`,
  );
} catch (error) {
  console.error(`mail-fake: could not listen: ${error instanceof Error ? error.message : error}`);
  process.exit(1);
}

let closing = false;
for (const signal of ['SIGINT', 'SIGTERM']) {
  process.on(signal, () => {
    if (closing) return;
    closing = true;
    api.closeAllConnections?.();
    api.close();
    smtp.close(() => process.exit(0));
    setTimeout(() => process.exit(0), 2000).unref();
  });
}

// Started by our scripts (OFFSETRY_EXIT_WITH_PARENT=1): end when the script that started us is gone, even if
// it was killed without a chance to stop us, so no fake outlives its run on a port.
if (process.env.OFFSETRY_EXIT_WITH_PARENT === '1') {
  const parent = process.ppid;
  setInterval(() => {
    if (process.ppid !== parent) process.kill(process.pid, 'SIGTERM');
  }, 1000).unref();
}
