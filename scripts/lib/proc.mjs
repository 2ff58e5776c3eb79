// Child processes for the local stack: spawn with logs into a file, wait for ports, stop everything on exit.
// Node built-ins only: used before node_modules exists.
import { spawn } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { setTimeout as sleep } from 'node:timers/promises';
import { isPortOpen, LOOPBACK } from './ports.mjs';

/** @typedef {{ code: number | null, signal: NodeJS.Signals | null }} ExitInfo */

/**
 * @typedef {object} ManagedProcess
 * @property {string} name
 * @property {number} pid
 * @property {string} logFile
 * @property {import('node:child_process').ChildProcess} child
 * @property {Promise<ExitInfo>} exited resolves when the process has ended
 * @property {() => boolean} running
 * @property {(signal?: NodeJS.Signals, timeoutMs?: number) => Promise<ExitInfo>} stop
 *   signal (default SIGTERM) to the whole process group, SIGKILL after timeoutMs (default 10 s)
 */

/** @type {Set<ManagedProcess>} */
const live = new Set();
/** @type {Array<() => unknown>} */
const shutdownHooks = [];
let handlersInstalled = false;
let shuttingDown = false;

/**
 * Last `lines` lines of a text file ('' when it does not exist).
 * @param {string} file
 * @param {number} [lines]
 */
export function tail(file, lines = 40) {
  try {
    const text = fs.readFileSync(file, 'utf8');
    return text.split('\n').slice(-lines - 1).join('\n').trimEnd();
  } catch {
    return '';
  }
}

/**
 * Spawn a long-running child in its own process group; stdout and stderr go into logFile (appended),
 * optionally echoed to our stdout with a prefix. The child is stopped when this process exits.
 * @param {string} name short label for messages
 * @param {string} command
 * @param {string[]} args
 * @param {{ env?: NodeJS.ProcessEnv, cwd?: string, logFile: string, echo?: boolean }} options
 * @returns {ManagedProcess}
 */
export function spawnLogged(name, command, args, options) {
  fs.mkdirSync(path.dirname(options.logFile), { recursive: true });
  const log = fs.createWriteStream(options.logFile, { flags: 'a' });
  log.write(`\n--- ${new Date().toISOString()} ${command} ${args.join(' ')}\n`);
  const child = spawn(command, args, {
    cwd: options.cwd,
    env: options.env ?? process.env,
    stdio: ['ignore', 'pipe', 'pipe'],
    // Own process group: a terminal Ctrl-C reaches only us, and we stop children in order (app before
    // database); stop() signals the group so grandchildren (npx → node) end too.
    detached: true,
  });
  /** @type {(chunk: Buffer) => void} */
  const onData = (chunk) => {
    log.write(chunk);
    if (options.echo) process.stdout.write(chunk);
  };
  child.stdout?.on('data', onData);
  child.stderr?.on('data', onData);
  /** @type {ExitInfo | undefined} */
  let exitInfo;
  /** @type {Promise<ExitInfo>} */
  const exited = new Promise((resolve) => {
    child.once('error', (error) => {
      log.write(`\n[${name}] failed to start: ${error.message}\n`);
      exitInfo = { code: -1, signal: null };
      resolve(exitInfo);
    });
    child.once('exit', (code, signal) => {
      exitInfo = { code, signal };
      resolve(exitInfo);
    });
  }).then((info) => {
    live.delete(managed);
    return new Promise((resolve) => log.end(() => resolve(info)));
  });

  /** @type {ManagedProcess} */
  const managed = {
    name,
    pid: child.pid ?? -1,
    logFile: options.logFile,
    child,
    exited,
    running: () => exitInfo === undefined,
    async stop(signal = 'SIGTERM', timeoutMs = 10_000) {
      if (exitInfo) return exitInfo;
      signalGroup(managed.pid, signal);
      const timer = setTimeout(() => signalGroup(managed.pid, 'SIGKILL'), timeoutMs);
      const info = await exited;
      clearTimeout(timer);
      // Grandchildren that ignored the signal must not outlive their parent.
      signalGroup(managed.pid, 'SIGKILL');
      return info;
    },
  };
  live.add(managed);
  installHandlers();
  return managed;
}

/**
 * @param {number} pid
 * @param {NodeJS.Signals} signal
 */
function signalGroup(pid, signal) {
  if (pid <= 0) return;
  try {
    process.kill(-pid, signal);
  } catch {
    try {
      process.kill(pid, signal);
    } catch {
      /* already gone */
    }
  }
}

/**
 * Run a command to completion. Rejects on a non-zero exit with the command and the end of its output.
 * @param {string} command
 * @param {string[]} args
 * @param {{ env?: NodeJS.ProcessEnv, cwd?: string, inherit?: boolean, allowFail?: boolean, logFile?: string, input?: string, detached?: boolean }} [options]
 *   inherit: share our terminal (default false: capture); logFile: also append the output there;
 *   detached: own process group, so a daemon it leaves behind (postgres) does not get the terminal's Ctrl-C
 * @returns {Promise<{ code: number, stdout: string, stderr: string }>}
 */
export function run(command, args, options = {}) {
  return new Promise((resolve, reject) => {
    const child = spawn(command, args, {
      cwd: options.cwd,
      env: options.env ?? process.env,
      stdio: options.inherit
        ? ['inherit', 'inherit', 'inherit']
        : [options.input === undefined ? 'ignore' : 'pipe', 'pipe', 'pipe'],
      detached: options.detached ?? false,
    });
    let stdout = '';
    let stderr = '';
    const log = options.logFile ? fs.createWriteStream(options.logFile, { flags: 'a' }) : undefined;
    log?.write(`\n--- ${new Date().toISOString()} ${command} ${args.join(' ')}\n`);
    child.stdout?.on('data', (chunk) => {
      stdout += chunk;
      log?.write(chunk);
    });
    child.stderr?.on('data', (chunk) => {
      stderr += chunk;
      log?.write(chunk);
    });
    if (child.stdin && options.input !== undefined) {
      child.stdin.on('error', () => {}); // the child may exit without reading; its exit code tells
      child.stdin.end(options.input);
    }
    child.once('error', (error) => {
      log?.end();
      reject(new Error(`could not run ${command}: ${error.message}`));
    });
    child.once('close', (code, signal) => {
      log?.end();
      const exitCode = code ?? (signal ? 128 : 1);
      if (exitCode !== 0 && !options.allowFail) {
        const output = `${stdout}\n${stderr}`.trim().split('\n').slice(-30).join('\n');
        reject(new Error(`${command} ${args.join(' ')} exited with ${signal ?? exitCode}\n${output}`));
      } else {
        resolve({ code: exitCode, stdout, stderr });
      }
    });
  });
}

/**
 * Wait until something accepts TCP connections on host:port. Fails early, with the end of the log, when
 * the given process exits first.
 * @param {number} port
 * @param {{ host?: string, timeoutMs?: number, proc?: ManagedProcess, what?: string }} [options]
 */
export async function waitForPort(port, options = {}) {
  const host = options.host ?? LOOPBACK;
  const timeoutMs = options.timeoutMs ?? 60_000;
  const what = options.what ?? options.proc?.name ?? `port ${port}`;
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    if (options.proc && !options.proc.running()) {
      const info = await options.proc.exited;
      throw new StartError(
        `${what} exited (${info.signal ?? `code ${info.code}`}) before listening on ${host}:${port}`,
        options.proc.logFile,
      );
    }
    if (await isPortOpen(port, host)) return;
    await sleep(100);
  }
  throw new StartError(`${what} did not listen on ${host}:${port} within ${timeoutMs / 1000} s`, options.proc?.logFile);
}

/** A start failure that knows which log explains it. */
export class StartError extends Error {
  /**
   * @param {string} message
   * @param {string} [logFile]
   */
  constructor(message, logFile) {
    const excerpt = logFile ? tail(logFile, 40) : '';
    super(logFile ? `${message}\n--- last lines of ${logFile} ---\n${excerpt || '(empty)'}\n---` : message);
    this.name = 'StartError';
    this.logFile = logFile;
  }
}

/**
 * Register a cleanup step run once on exit, SIGINT or SIGTERM (last registered runs first).
 * @param {() => unknown} hook
 */
export function onShutdown(hook) {
  shutdownHooks.push(hook);
  installHandlers();
}

/** @type {Promise<void> | undefined} */
let shutdownPromise;

/**
 * Run the cleanup steps and stop every child still running. Calling it again returns the same promise.
 * @returns {Promise<void>}
 */
export function shutdown() {
  shutdownPromise ??= (async () => {
    shuttingDown = true;
    while (shutdownHooks.length) {
      const hook = shutdownHooks.pop();
      try {
        await hook?.();
      } catch (error) {
        console.error(`cleanup step failed: ${error instanceof Error ? error.message : error}`);
      }
    }
    await Promise.all([...live].map((p) => p.stop()));
  })();
  return shutdownPromise;
}

/** Whether shutdown() has begun (a child that ends now was stopped by us). */
export const isShuttingDown = () => shuttingDown;

function installHandlers() {
  if (handlersInstalled) return;
  handlersInstalled = true;
  for (const signal of /** @type {const} */ (['SIGINT', 'SIGTERM', 'SIGHUP'])) {
    process.on(signal, () => {
      if (shutdownPromise) return;
      console.error(`\n${signal} received: stopping what was started …`);
      shutdown().finally(() => process.exit(signal === 'SIGINT' ? 130 : 143));
    });
  }
  // Last resort when the script ends without shutdown(): synchronous signals only.
  process.on('exit', () => {
    for (const p of live) signalGroup(p.pid, 'SIGTERM');
  });
}

/**
 * Record a child's pid so a later start can find a leftover of a crashed run.
 * @param {string} file
 * @param {number} pid
 */
export function writePidFile(file, pid) {
  fs.mkdirSync(path.dirname(file), { recursive: true });
  fs.writeFileSync(file, `${pid}\n`);
}

/**
 * Stop a leftover process from an earlier run when its pid file names a live process whose command line or
 * environment contains `marker` (so an unrelated process that reused the pid is never touched).
 * @param {string} file
 * @param {string} marker
 * @returns {Promise<boolean>} whether a leftover was stopped
 */
export async function stopLeftover(file, marker) {
  let pid = 0;
  try {
    pid = Number.parseInt(fs.readFileSync(file, 'utf8').trim(), 10);
  } catch {
    return false;
  }
  if (!Number.isInteger(pid) || pid <= 0) return false;
  let cmdline = '';
  let environ = '';
  try {
    cmdline = fs.readFileSync(`/proc/${pid}/cmdline`, 'utf8').replaceAll('\0', ' ');
    environ = fs.readFileSync(`/proc/${pid}/environ`, 'utf8');
  } catch {
    if (!cmdline) {
      fs.rmSync(file, { force: true });
      return false;
    }
  }
  if (!cmdline.includes(marker) && !environ.includes(marker)) {
    fs.rmSync(file, { force: true });
    return false;
  }
  signalGroup(pid, 'SIGTERM');
  for (let i = 0; i < 100 && fs.existsSync(`/proc/${pid}`); i++) await sleep(100);
  if (fs.existsSync(`/proc/${pid}`)) signalGroup(pid, 'SIGKILL');
  fs.rmSync(file, { force: true });
  return true;
}

/**
 * Path of a local bin (node_modules/.bin/name) or undefined.
 * @param {string} root
 * @param {string} name
 */
export function localBin(root, name) {
  const file = path.join(root, 'node_modules', '.bin', name);
  return fs.existsSync(file) ? file : undefined;
}
