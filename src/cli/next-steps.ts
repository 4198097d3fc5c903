/**
 * What to run next, printed at the end of the human summaries of `replay` and `sweep`
 * so someone new to pairflow finds the report and the sweep. Never printed with
 * `--json` (stdout then holds only the result).
 */
import { formatWindow, type ReplaySummary } from '../replay/summary.js';
import type { SweepResult } from '../sweep/sweep.js';

const logArg = (logs: readonly string[]): string => (logs.length === 1 ? logs[0]! : logs.join(' '));

/** The lines after a replay's summary. */
export function replayNextSteps(s: ReplaySummary, logs: readonly string[], outDir: string | undefined): string {
  const log = logArg(logs);
  const lines = ['', 'next:'];
  const noHindsight = s.hindsight === null ? ' (without --no-hindsight, to see the regret)' : '';
  if (outDir !== undefined && s.hindsight !== null) lines.push(`  pairflow report ${outDir} --out ${outDir}/report.html   # one page to hand on: regret by cause and hour, maps, the match ceiling`);
  else lines.push(`  pairflow replay ${log} --out run1 && pairflow report run1 --out report.html   # as one page to hand on${noHindsight}`);
  const w = formatWindow(s.windowMs);
  lines.push(`  pairflow sweep ${log} --windows 2s,${w === '2s' ? '5s' : w},30s,1m --reserves P,10 --out sweep1   # which policy costs least, and how sure`);
  return lines.join('\n') + '\n';
}

/** The lines after a sweep's table. */
export function sweepNextSteps(r: SweepResult, logs: readonly string[], outDir: string | undefined): string {
  const log = logArg(logs);
  const p = r.recommendation.policy;
  const fields = [p.reserve !== null ? `"reserve": ${p.reserve}` : '', p.commit !== 'all' ? `"commit": "${p.commit}"` : ''].filter(Boolean);
  const extra = fields.length > 0 ? ` --config FILE   (FILE holding {${fields.join(', ')}})` : '';
  const lines = ['', 'next:'];
  if (outDir !== undefined) lines.push(`  pairflow report ${outDir} --out ${outDir}/report.html   # charts, maps and this recommendation as one page`);
  else lines.push(`  pairflow sweep ${log} ... --out sweep1 && pairflow report sweep1 --out report.html   # the same as one page`);
  lines.push(`  pairflow replay ${log} --window ${formatWindow(p.windowMs)} --out run-best${extra}   # the recommended policy in full`);
  return lines.join('\n') + '\n';
}
