// First steps of `npm start` / `npm test` on a fresh clone: dependencies and Debian packages.
// Node built-ins only: this runs before node_modules exists.
import fs from 'node:fs';
import path from 'node:path';
import { run } from './proc.mjs';

export const isRoot = typeof process.getuid === 'function' && process.getuid() === 0;

/**
 * Run `npm ci` (falling back to `npm install`) when node_modules is missing or package-lock.json is newer
 * than the lock npm wrote into node_modules at the last install.
 * @param {string} root
 * @param {(line: string) => void} [log]
 */
export async function ensureDependencies(root, log = (line) => console.log(line)) {
  const lock = path.join(root, 'package-lock.json');
  const installedLock = path.join(root, 'node_modules', '.package-lock.json');
  let reason = '';
  if (!fs.existsSync(path.join(root, 'node_modules'))) reason = 'node_modules is missing';
  else if (!fs.existsSync(installedLock)) reason = 'node_modules has no .package-lock.json';
  else if (fs.existsSync(lock) && fs.statSync(lock).mtimeMs > fs.statSync(installedLock).mtimeMs) {
    reason = 'package-lock.json is newer than node_modules';
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
