/**
 * `pairflow report DIR... --out FILE.html [--bootstrap N] [--seed S]` (SPEC §6): one
 * self-contained HTML report, with CSV tables beside it, from replay and sweep
 * directories. stdout gets the paths written; stages go to stderr.
 */
import type { Command } from 'commander';
import { buildReport } from '../../report/report.js';
import { progressLine, wholeNumber } from './sweep.js';

interface ReportCliOptions {
  out?: string;
  bootstrap: string;
  seed: string;
}

export function registerReport(program: Command): void {
  program
    .command('report')
    .description('Write one self-contained HTML report (and CSV tables beside it) from replay or sweep directories.')
    .argument('<dir...>', 'run directories of pairflow replay --out or pairflow sweep --out')
    .requiredOption('--out <file.html>', 'the HTML file; tables go beside it as <name>-<table>.csv')
    .option('--bootstrap <n>', 'bootstrap resamples for the paired comparison of runs on the same log', '1000')
    .option('--seed <s>', 'seed of that bootstrap', '1')
    .addHelpText('after', `
The page needs no network and no script: open it from disk, mail it, print it.
Several directories: the first is the baseline; runs of the same log (same input
sha256) are compared day by day (hour by hour under two days) with a paired interval.`)
    .action(async (dirs: string[], o: ReportCliOptions) => {
      const bootstrap = wholeNumber(o.bootstrap, '--bootstrap', 0);
      const seed = wholeNumber(o.seed, '--seed', 0);
      const progress = progressLine('report');
      const r = await buildReport({
        dirs,
        out: o.out!,
        bootstrap,
        seed,
        command: ['pairflow', ...process.argv.slice(2)],
        onPhase: (note) => progress.phase(note),
      });
      progress.done();
      process.stdout.write(`pairflow report: ${r.html} (${(r.bytes / 1024).toFixed(0)} kB, ${r.charts} charts, ${r.runs} run${r.runs === 1 ? '' : 's'})\n`);
      for (const t of r.tables) process.stdout.write(`  ${t}\n`);
    });
}
