// First steps of `npm start` / `npm test` on a fresh clone: dependencies and Debian packages.
// Node built-ins only: this runs before node_modules exists.
import fs from 'node:fs';
import path from 'node:path';
import { run } from './proc.mjs';

export const isRoot = typeof process.getuid === 'function' && process.getuid() === 0;

/**
 * Whether the packages npm recorded at its last install (node_modules/.package-lock.json) are exactly the
 * ones package-lock.json asks for (same paths, versions and integrity).
 * @param {string} lockFile
 * @param {string} installedLockFile
 */
export function installMatchesLock(lockFile, installedLockFile) {
  try {
    /** @type {{ packages?: Record<string, { version?: string, integrity?: string, link?: boolean }> }} */
    const wanted = JSON.parse(fs.readFileSync(lockFile, 'utf8'));
    /** @type {typeof wanted} */
    const installed = JSON.parse(fs.readFileSync(installedLockFile, 'utf8'));
    const want = Object.entries(wanted.packages ?? {}).filter(([key, entry]) => key !== '' && !entry.link);
    const have = installed.packages ?? {};
    // npm leaves optional packages for other platforms out of node_modules: only compare what it installed.
    return want.every(([key, entry]) => {
      const got = have[key];
      if (!got) return Boolean(/** @type {{ optional?: boolean }} */ (entry).optional);
      return got.version === entry.version && (got.integrity ?? '') === (entry.integrity ?? '');
    });
  } catch {
    return false;
  }
}

/**
 * Run `npm ci` (falling back to `npm install`) when node_modules is missing, or when package-lock.json is
 * newer than the lock npm wrote into node_modules at the last install and the two really differ (a checkout
 * touches the file's time without changing it).
 * @param {string} root
 * @param {(line: string) => void} [log]
 */
export async function ensureDependencies(root, log = (line) => console.log(line)) {
  const lock = path.join(root, 'package-lock.json');
  const modules = path.join(root, 'node_modules');
  const installedLock = path.join(modules, '.package-lock.json');
  let reason = '';
  if (!fs.existsSync(modules)) reason = 'node_modules is missing';
  else if (fs.lstatSync(modules).isSymbolicLink()) {
    // npm ci empties the folder a link points to (someone else's install): never run it here.
    log('node_modules is a symbolic link: not installing dependencies (install in the folder it points to)');
    return false;
  } else if (!fs.existsSync(installedLock)) reason = 'node_modules has no .package-lock.json';
  else if (
    fs.existsSync(lock) &&
    fs.statSync(lock).mtimeMs > fs.statSync(installedLock).mtimeMs &&
    !installMatchesLock(lock, installedLock)
  ) {
    reason = 'package-lock.json changed since the last install';
  }
  if (!reason) return false;
  const npm = process.platform === 'win32' ? 'npm.cmd' : 'npm';
  const flags = ['--no-audit', '--no-fund'];
  log(`Installing dependencies (${reason}): npm ci ${flags.join(' ')} …`);
  const ci = await run(npm, ['ci', ...flags], { cwd: root, inherit: true, allowFail: true });
  if (ci.code !== 0) {
    log(`npm ci failed (exit ${ci.code}); trying npm install ${flags.join(' ')} …`);
    await run(npm, ['install', ...flags], { cwd: root, inherit: true });
  }
  return true;
}

let aptUpdated = false;
// Wait for another apt/dpkg run to finish instead of failing on its lock.
const APT_WAIT = ['-o', 'DPkg::Lock::Timeout=300'];

/**
 * apt-get install Debian packages (root only; one `apt-get update` per process), printing what it does.
 * @param {string[]} packages
 * @param {string} why
 * @param {(line: string) => void} [log]
 */
export async function aptInstall(packages, why, log = (line) => console.log(line)) {
  if (!isRoot) {
    throw new Error(`${why}: install it once with: sudo apt-get update && sudo apt-get install -y ${packages.join(' ')}`);
  }
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  if (!aptUpdated) {
    log(`${why}: running apt-get update …`);
    await run('apt-get', [...APT_WAIT, 'update'], { env, inherit: true });
    aptUpdated = true;
  }
  log(`${why}: running apt-get install -y ${packages.join(' ')} …`);
  await run('apt-get', [...APT_WAIT, 'install', '-y', ...packages], { env, inherit: true });
}
