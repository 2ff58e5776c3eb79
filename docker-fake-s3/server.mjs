#!/usr/bin/env node
// S3-protocol fake for local runs and tests: s3rver on loopback, files in a folder, bucket created at start.
// Usage: node docker-fake-s3/server.mjs [--host 127.0.0.1] [--port 54330] [--dir .data/s3] [--bucket offsetry]
// (each also from S3_FAKE_HOST, S3_FAKE_PORT, S3_FAKE_DIR, S3_BUCKET). Prints one "ready" line when listening.
import fs from 'node:fs';
import path from 'node:path';
import { parseArgs } from 'node:util';
import S3rver from 's3rver';

const { values } = parseArgs({
  options: {
    host: { type: 'string', default: process.env.S3_FAKE_HOST ?? '127.0.0.1' },
    port: { type: 'string', default: process.env.S3_FAKE_PORT ?? '54330' },
    dir: { type: 'string', default: process.env.S3_FAKE_DIR ?? '.data/s3' },
    bucket: { type: 'string', default: process.env.S3_BUCKET ?? 'offsetry' },
    verbose: { type: 'boolean', default: false },
  },
});

const port = Number.parseInt(values.port, 10);
if (!Number.isInteger(port) || port <= 0 || port > 65535) {
  console.error(`s3-fake: --port must be a TCP port, got "${values.port}"`);
  process.exit(2);
}
const directory = path.resolve(values.dir);
fs.mkdirSync(directory, { recursive: true });

// Browsers PUT straight to presigned URLs from the app's origin: allow any origin for GET/PUT/HEAD, any
// request header, and let scripts read the ETag of an upload (the S3 CORS rule format, AWS S3 docs "CORS").
const cors = `<CORSConfiguration>
  <CORSRule>
    <AllowedOrigin>*</AllowedOrigin>
    <AllowedMethod>GET</AllowedMethod>
    <AllowedMethod>PUT</AllowedMethod>
    <AllowedMethod>HEAD</AllowedMethod>
    <AllowedHeader>*</AllowedHeader>
    <ExposeHeader>ETag</ExposeHeader>
    <MaxAgeSeconds>3000</MaxAgeSeconds>
  </CORSRule>
</CORSConfiguration>`;

const buckets = values.bucket
  .split(',')
  .map((name) => name.trim())
  .filter(Boolean);

const server = new S3rver({
  address: values.host,
  port,
  directory,
  silent: !values.verbose,
  // Path-style addressing only (S3_FORCE_PATH_STYLE=true): no bucket-name host names on loopback.
  vhostBuckets: false,
  configureBuckets: buckets.map((name) => ({ name, configs: [cors] })),
});

try {
  const address = await server.run();
  const where = typeof address === 'object' && address ? `${address.address}:${address.port}` : `${values.host}:${port}`;
  console.log(`s3-fake ready http://${where} buckets=${buckets.join(',')} dir=${directory}`);
} catch (error) {
  console.error(`s3-fake: could not listen on ${values.host}:${port}: ${error instanceof Error ? error.message : error}`);
  process.exit(1);
}

let closing = false;
for (const signal of ['SIGINT', 'SIGTERM']) {
  process.on(signal, () => {
    if (closing) return;
    closing = true;
    server.close().finally(() => process.exit(0));
    // Open keep-alive sockets would hold close() forever.
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
