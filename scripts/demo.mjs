// `npm run demo`: install, migrate and seed the embedded SQLite database, build, and serve on
// http://localhost:3000 (PORT overrides). Safe to run again: migrations and the seed are idempotent.
import { randomBytes } from 'node:crypto';
import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { ensureNodeModules, root, run } from './ensure.mjs';

/**
 * `next start` runs in production mode, where the session secret must come from the environment.
 * For this local demo we use the same per-checkout secret that development mode keeps in
 * <data dir>/.secret (lib/server/env.ts), creating it when missing.
 */
function localSecret() {
  const dir = path.resolve(root, process.env.BORDERLINE_DATA_DIR ?? 'data');
  const file = path.join(dir, '.secret');
  if (!existsSync(file)) {
    mkdirSync(dir, { recursive: true });
    writeFileSync(file, `${randomBytes(32).toString('base64url')}\n`, { mode: 0o600 });
  }
  return readFileSync(file, 'utf8').trim();
}

ensureNodeModules();
run('npm', ['run', '--silent', 'db:generate']);
run('npm', ['run', '--silent', 'db:migrate']);
run('npm', ['run', '--silent', 'db:seed']);
const port = process.env.PORT ?? '3000';
// `next build` also runs in production mode and renders pages that read the session.
const production = {
  NEXTAUTH_SECRET: process.env.NEXTAUTH_SECRET ?? localSecret(),
  NEXTAUTH_URL: process.env.NEXTAUTH_URL ?? `http://localhost:${port}`,
};
run('npx', ['next', 'build'], production);
run('npx', ['next', 'start', '-p', port], production);
