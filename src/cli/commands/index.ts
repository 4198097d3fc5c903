import type { Command } from 'commander';
import { registerGen } from './gen.js';
import { registerLive } from './live.js';
import { registerPublish } from './publish.js';
import { registerReplay } from './replay.js';
import { registerReport } from './report.js';
import { registerSolve } from './solve.js';
import { registerSummarize } from './summarize.js';
import { registerSweep } from './sweep.js';

/** A subcommand registers itself on the program. Add one line per command below. */
export type RegisterCommand = (program: Command) => void;

export const COMMANDS: RegisterCommand[] = [
  registerGen,
  registerLive,
  registerPublish,
  registerReplay,
  registerReport,
  registerSolve,
  registerSummarize,
  registerSweep,
];
