// Set-up steps shared by `npm run demo` and `npm test`, written in plain Node so they run
// before the project's dependencies are installed.
import { execFileSync, spawnSync } from 'node:child_process';
import { existsSync, statSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

export const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');

// This machine class has no general network; Next's anonymous telemetry would only time out.
process.env.NEXT_TELEMETRY_DISABLED ??= '1';

/** Runs a command in the repo root with inherited output; exits the process on failure. */
export function run(cmd, args, env = {}) {
  const r = spawnSync(cmd, args, { cwd: root, stdio: 'inherit', env: { ...process.env, ...env } });
  if (r.status !== 0) {
    console.error(`borderline: '${[cmd, ...args].join(' ')}' failed (exit ${r.status ?? r.signal})`);
    process.exit(r.status ?? 1);
  }
}

/** `npm ci` when node_modules is missing or older than package-lock.json. */
export function ensureNodeModules() {
  const marker = path.join(root, 'node_modules', '.package-lock.json');
  const lock = path.join(root, 'package-lock.json');
  if (existsSync(marker) && statSync(marker).mtimeMs >= statSync(lock).mtimeMs) return;
  console.log('borderline: installing dependencies (npm ci)…');
  run('npm', ['ci', '--no-audit', '--no-fund']);
}

function onPath(bin) {
  return spawnSync('sh', ['-c', `command -v ${bin}`], { stdio: 'ignore' }).status === 0;
}

/**
 * Debian packages the test suite needs: Chromium for Playwright, LIBSVM and LIBLINEAR as
 * reference solvers. Installed with apt-get when missing and we are root; otherwise a clear
 * message says what to install.
 */
export const DEBIAN_TEST_PACKAGES = [
  { bin: 'chromium', pkg: 'chromium' },
  { bin: 'svm-train', pkg: 'libsvm-tools' },
  { bin: 'liblinear-train', pkg: 'liblinear-tools' },
];

export function ensureDebianPackages(list = DEBIAN_TEST_PACKAGES) {
  const missing = list.filter((p) => !onPath(p.bin)).map((p) => p.pkg);
  if (missing.length === 0) return;
  const isRoot = typeof process.getuid === 'function' && process.getuid() === 0;
  if (!isRoot || !onPath('apt-get')) {
    console.error(`borderline: the tests need these Debian packages: ${missing.join(' ')}\n` +
      `  install them with: sudo apt-get install -y ${missing.join(' ')}`);
    process.exit(1);
  }
  console.log(`borderline: installing ${missing.join(' ')} with apt-get…`);
  run('apt-get', ['update', '-qq']);
  run('apt-get', ['install', '-y', '-qq', '--no-install-recommends', ...missing], { DEBIAN_FRONTEND: 'noninteractive' });
}

export function gitRevision() {
  try {
    return execFileSync('git', ['rev-parse', '--short', 'HEAD'], { cwd: root }).toString().trim();
  } catch {
    return 'unknown';
  }
}
