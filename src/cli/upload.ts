/**
 * `offsetry upload`: send a session file to the server as multipart/form-data, streamed from disk (the unit
 * and metadata first, so the server checks the CSV while it arrives), with a progress bar for large files.
 * Refusals print the server's line/field problems the way `offsetry check` prints the local parser's.
 */
import { randomBytes } from 'node:crypto';
import { createReadStream, existsSync, statSync } from 'node:fs';
import { basename, resolve } from 'node:path';
import { CliError, EXIT_OK, EXIT_USAGE, parseOptions, required, type Io } from './common';
import { REMOTE_OPTIONS, refusalError, refusalOf, remoteFrom, send } from './remote';
import { formatProblem, type InputProblem } from '../lib/engine/types';
import { UPLOAD_USAGE } from './usage';

/** Files from this size on get a progress bar. */
export const PROGRESS_FROM_BYTES = 256 * 1024;

const fmtBytes = (b: number) => (b < 1024 * 1024 ? `${(b / 1024).toFixed(0)} KiB` : `${(b / 1024 / 1024).toFixed(1)} MiB`);

/** A progress bar on stderr: redrawn in place on a terminal, one line per tenth otherwise (logs, CI). */
export function progressBar(total: number, io: Io, tty = Boolean(process.stderr.isTTY)) {
  let lastTenth = -1;
  return (sent: number) => {
    const fraction = total ? Math.min(1, sent / total) : 1;
    const width = 30;
    const filled = Math.round(fraction * width);
    const line = `uploading [${'#'.repeat(filled)}${'-'.repeat(width - filled)}] ${(fraction * 100).toFixed(0).padStart(3)}%  ${fmtBytes(sent)} / ${fmtBytes(total)}`;
    if (tty) {
      process.stderr.write(`\r${line}${fraction === 1 ? '\n' : ''}`);
      return;
    }
    const tenth = Math.floor(fraction * 10);
    if (tenth !== lastTenth) {
      lastTenth = tenth;
      io.err(line);
    }
  };
}

function quoted(s: string) {
  return s.replace(/["\r\n\\]/g, (c) => encodeURIComponent(c));
}

/** The multipart body as a stream of the fields, then the file read from disk; its exact length up front. */
function multipart(fields: [string, string][], filePath: string, fileName: string, onFileBytes: (n: number) => void) {
  const boundary = `----offsetry-${randomBytes(12).toString('hex')}`;
  const enc = new TextEncoder();
  const head = enc.encode(
    fields.map(([k, v]) => `--${boundary}\r\ncontent-disposition: form-data; name="${k}"\r\n\r\n${v}\r\n`).join('') +
      `--${boundary}\r\ncontent-disposition: form-data; name="file"; filename="${quoted(fileName)}"\r\ncontent-type: text/csv\r\n\r\n`,
  );
  const tail = enc.encode(`\r\n--${boundary}--\r\n`);
  const size = statSync(filePath).size;
  let sent = 0;
  const body = new ReadableStream<Uint8Array>({
    async start(controller) {
      controller.enqueue(head);
      try {
        for await (const chunk of createReadStream(filePath, { highWaterMark: 64 * 1024 })) {
          controller.enqueue(chunk as Buffer);
          sent += (chunk as Buffer).length;
          onFileBytes(sent);
        }
        controller.enqueue(tail);
        controller.close();
      } catch (e) {
        controller.error(e);
      }
    },
  });
  return { body, boundary, length: head.length + size + tail.length, size };
}

export async function runUpload(args: string[], io: Io): Promise<number> {
  const v = parseOptions(
    args,
    {
      ...REMOTE_OPTIONS,
      unit: { type: 'string' },
      file: { type: 'string' },
      'measured-on': { type: 'string' },
      instrument: { type: 'string' },
      uncertainty: { type: 'string' },
      technician: { type: 'string' },
      notes: { type: 'string' },
      'allow-outside-limits': { type: 'boolean' },
    },
    UPLOAD_USAGE,
  );
  const unit = required(v.unit, '--unit', UPLOAD_USAGE);
  const file = required(v.file, '--file', UPLOAD_USAGE);
  const measuredOn = required(v['measured-on'], '--measured-on', UPLOAD_USAGE);
  if (!/^\d{4}-\d{2}-\d{2}$/.test(measuredOn)) throw new CliError(`--measured-on "${measuredOn}" is not a date (expected YYYY-MM-DD)`, EXIT_USAGE);
  const remote = remoteFrom(v, UPLOAD_USAGE);
  const full = resolve(file);
  if (!existsSync(full)) throw new CliError(`${file}: session file not found`);
  if (!statSync(full).isFile()) throw new CliError(`${file}: session file is not a file`);

  const fields: [string, string][] = [['unit', unit], ['measuredOn', measuredOn]];
  if (typeof v.instrument === 'string') fields.push(['instrument', v.instrument]);
  if (typeof v.uncertainty === 'string') fields.push(['instrumentUncertainty', v.uncertainty]);
  if (typeof v.technician === 'string') fields.push(['technician', v.technician]);
  if (typeof v.notes === 'string') fields.push(['notes', v.notes]);
  if (v['allow-outside-limits']) fields.push(['allowOutsideLimits', 'true']);

  const size = statSync(full).size;
  const progress = size >= PROGRESS_FROM_BYTES ? progressBar(size, io) : () => {};
  const form = multipart(fields, full, basename(full), progress);
  const res = await send(remote, '/api/sessions', {
    method: 'POST',
    headers: { 'content-type': `multipart/form-data; boundary=${form.boundary}`, 'content-length': String(form.length) },
    body: form.body,
    duplex: 'half',
  });
  if (res.status !== 201) {
    const refusal = await refusalOf(res);
    if (refusal.status === 409 && refusal.body.existing) {
      const existing = refusal.body.existing as { id: string; url: string };
      throw new CliError(`the server refused ${file}: ${refusal.error}\n  the earlier upload: session ${existing.id} (${new URL(existing.url, remote.base).href})`);
    }
    const hint = refusal.body.outsideLimits === true ? '\n(use --allow-outside-limits to accept joint readings outside the limits)' : '';
    const err = refusalError(refusal, `the server refused ${file}`, file);
    err.message += hint;
    throw err;
  }
  const body = (await res.json()) as { id: string; url: string; poseCount: number; warnings: InputProblem[] };
  for (const w of body.warnings ?? []) io.err(`warning: ${formatProblem({ ...w, file: w.line !== undefined ? file : w.file })}`);
  io.out(`uploaded ${file} for unit ${unit}: session ${body.id}, ${body.poseCount} poses`);
  io.out(`  ${new URL(body.url, remote.base).href}`);
  return EXIT_OK;
}
