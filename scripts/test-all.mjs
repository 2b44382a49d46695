// `npm test`: the whole suite from a fresh clone — installs what is missing, then type-checks,
// runs the unit and integration tests (vitest) and the end-to-end tests (Playwright, Chromium).
import { ensureDebianPackages, ensureNodeModules, run } from './ensure.mjs';

ensureNodeModules();
ensureDebianPackages();
run('npm', ['run', '--silent', 'db:generate']);
run('npx', ['tsc', '--noEmit']);
run('npx', ['vitest', 'run']);
run('npx', ['playwright', 'test']);
