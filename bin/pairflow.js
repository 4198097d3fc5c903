#!/usr/bin/env node
// The installed command. The CLI itself is compiled TypeScript in dist/, built by
// `npm run build` (which `npm ci` runs through the `prepare` script); a checkout
// without dist/ gets one line saying so instead of a module-resolution stack trace.
import { existsSync } from 'node:fs';

const entry = new URL('../dist/cli/main.js', import.meta.url);
if (!existsSync(entry)) {
  process.stderr.write(
    `pairflow: ${new URL('../dist/', import.meta.url).pathname} is not built; run \`npm run build\` (or \`npm ci\`) in the pairflow checkout first\n`,
  );
  process.exit(1);
}
const { main } = await import(entry.href);
main(process.argv).then((code) => {
  process.exitCode = code;
});
