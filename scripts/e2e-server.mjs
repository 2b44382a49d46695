// Web server for the Playwright run: a fresh SQLite database (migrated and seeded with the demo),
// a production build, then `next start` on the given port.
import { rmSync, mkdirSync } from 'node:fs';
import path from 'node:path';
import { root, run } from './ensure.mjs';

const port = process.argv[2] ?? '3100';
const dir = path.join(root, 'data', 'e2e');
rmSync(dir, { recursive: true, force: true });
mkdirSync(dir, { recursive: true });
const env = {
  DATABASE_URL: `file:${path.join(dir, 'e2e.db')}`,
  NEXTAUTH_URL: `http://127.0.0.1:${port}`,
  NEXTAUTH_SECRET: 'e2e-only-secret-not-for-production-0123456789',
};
Object.assign(process.env, env);
run('npm', ['run', '--silent', 'db:migrate']);
run('npm', ['run', '--silent', 'db:seed']);
if (process.env.E2E_SKIP_BUILD !== '1') run('npx', ['next', 'build']);
run('npx', ['next', 'start', '-H', '127.0.0.1', '-p', port]);
