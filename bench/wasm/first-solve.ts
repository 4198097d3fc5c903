/**
 * First solves in fresh processes, the solvers alternated run by run: pairflow of
 * another checkout (`main`, at $MAIN_TREE: e.g. the solver before the kernel), pairflow
 * of this tree (`js`; see probe-child.ts for the others), and scipy's
 * linear_sum_assignment (`scipy`, its first call in a fresh Python process). Prints
 * min and median per case and solver.
 * Usage: [MAIN_TREE=...] npx tsx bench/wasm/first-solve.ts DIR REPEATS CASE[,CASE...] [SOLVERS]
 *   (instances from bench/wasm/make-instances.ts; CASE like geometric-1000;
 *    SOLVERS default js,scipy)
 */
import { spawnSync } from 'node:child_process';
import { join } from 'node:path';

const [dir, repText, caseText, solverText] = process.argv.slice(2);
const repeats = Number(repText ?? 5);
const cases = (caseText ?? 'geometric-1000').split(',');
const solvers = (solverText ?? 'js,scipy').split(',');
const here = new URL('.', import.meta.url).pathname;

function runOne(solver: string, name: string): { ms: number; cost: number; certified?: boolean; wasm?: boolean } {
  const n = Number(name.split('-').pop());
  const caseDir = join(dir!, name);
  const r =
    solver === 'scipy'
      ? spawnSync('python3', [join(here, 'scipy_first.py'), caseDir, String(n)], { encoding: 'utf8' })
      : spawnSync(process.execPath, ['--import', 'tsx', join(here, 'probe-child.ts'), solver, caseDir, String(n)], { encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`${solver} ${name}: ${r.stderr}`);
  const out = JSON.parse(r.stdout.trim().split('\n').pop()!) as { ms: number | number[]; cost: number; certified?: boolean; wasm?: boolean };
  return { ...out, ms: Array.isArray(out.ms) ? out.ms[0]! : out.ms };
}

const median = (a: number[]) => {
  const s = [...a].sort((x, y) => x - y);
  return s.length % 2 ? s[(s.length - 1) / 2]! : (s[s.length / 2 - 1]! + s[s.length / 2]!) / 2;
};
for (const name of cases) {
  const ms = new Map<string, number[]>(solvers.map((s) => [s, []]));
  const notes = new Map<string, string>();
  for (let k = 0; k < repeats; k++) {
    // alternate the order run by run
    const order = k % 2 === 0 ? solvers : [...solvers].reverse();
    for (const s of order) {
      const o = runOne(s, name);
      ms.get(s)!.push(o.ms);
      notes.set(s, `cost ${o.cost}${o.certified === undefined ? '' : o.certified ? ' certified' : ' CERTIFICATE FAILED'}${o.wasm ? ' (kernel)' : ''}`);
    }
  }
  for (const s of solvers) {
    const a = ms.get(s)!;
    process.stdout.write(`${name} ${s.padEnd(6)} min ${Math.min(...a).toFixed(1)} median ${median(a).toFixed(1)} ms  [${a.map((x) => x.toFixed(1)).join(' ')}]  ${notes.get(s)}\n`);
  }
}
