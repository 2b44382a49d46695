// `npm run demo`: install, migrate and seed the embedded SQLite database, build, and serve on
// http://localhost:3000 (PORT overrides). Safe to run again: migrations and the seed are idempotent.
import { ensureNodeModules, run } from './ensure.mjs';

ensureNodeModules();
run('npm', ['run', '--silent', 'db:generate']);
run('npm', ['run', '--silent', 'db:migrate']);
run('npm', ['run', '--silent', 'db:seed']);
run('npx', ['next', 'build']);
run('npx', ['next', 'start', '-p', process.env.PORT ?? '3000']);
