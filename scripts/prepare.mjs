// npm runs this `prepare` script after `npm ci` / `npm install` in a checkout and
// before `npm pack`, so the `pairflow` command works right after installing. It
// compiles src/ into dist/ with the TypeScript compiler from the dev dependencies;
// an install without them (`npm ci --omit=dev`) cannot compile, so it says so and
// leaves dist/ as it is instead of failing the whole install.
import { spawnSync } from 'node:child_process';
import { createRequire } from 'node:module';

const require = createRequire(import.meta.url);
let tsc;
try {
  tsc = require.resolve('typescript/bin/tsc');
} catch {
  process.stderr.write('pairflow prepare: TypeScript is not installed (dev dependencies omitted), so dist/ was not built; run `npm ci` with dev dependencies, then `npm run build`\n');
  process.exit(0);
}
const r = spawnSync(process.execPath, [tsc, '-p', 'tsconfig.build.json'], { stdio: 'inherit', cwd: new URL('..', import.meta.url) });
process.exit(r.status ?? 1);
