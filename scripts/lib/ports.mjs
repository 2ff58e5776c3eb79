// Loopback port helpers. Node built-ins only: used before node_modules exists.
import net from 'node:net';

export const LOOPBACK = '127.0.0.1';

/**
 * True when nothing listens on host:port and we may bind it.
 * @param {number} port
 * @param {string} [host]
 * @returns {Promise<boolean>}
 */
export function isPortFree(port, host = LOOPBACK) {
  return new Promise((resolve) => {
    const server = net.createServer();
    server.unref();
    server.once('error', () => resolve(false));
    server.listen({ port, host, exclusive: true }, () => {
      server.close(() => resolve(true));
    });
  });
}

/**
 * True when something accepts TCP connections on host:port.
 * @param {number} port
 * @param {string} [host]
 * @param {number} [timeoutMs]
 * @returns {Promise<boolean>}
 */
export function isPortOpen(port, host = LOOPBACK, timeoutMs = 500) {
  return new Promise((resolve) => {
    const socket = net.connect({ port, host });
    const done = (/** @type {boolean} */ open) => {
      socket.removeAllListeners();
      socket.destroy();
      resolve(open);
    };
    socket.setTimeout(timeoutMs, () => done(false));
    socket.once('connect', () => done(true));
    socket.once('error', () => done(false));
  });
}

/**
 * A port the kernel picks as free on the loopback interface. Racy by nature (another process may take it
 * before we bind), so callers start their service right away and retry on EADDRINUSE if it matters.
 * @param {string} [host]
 * @returns {Promise<number>}
 */
export function findFreePort(host = LOOPBACK) {
  return new Promise((resolve, reject) => {
    const server = net.createServer();
    server.unref();
    server.once('error', reject);
    server.listen({ port: 0, host, exclusive: true }, () => {
      const address = server.address();
      const port = typeof address === 'object' && address ? address.port : 0;
      server.close(() => (port ? resolve(port) : reject(new Error('no free port found'))));
    });
  });
}

/**
 * `count` distinct free loopback ports.
 * @param {number} count
 * @param {string} [host]
 * @returns {Promise<number[]>}
 */
export async function findFreePorts(count, host = LOOPBACK) {
  /** @type {Set<number>} */
  const ports = new Set();
  while (ports.size < count) ports.add(await findFreePort(host));
  return [...ports];
}
