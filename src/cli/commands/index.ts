import type { Command } from 'commander';
import { registerGen } from './gen.js';
import { registerSolve } from './solve.js';

/** A subcommand registers itself on the program. Add one line per command below. */
export type RegisterCommand = (program: Command) => void;

export const COMMANDS: RegisterCommand[] = [
  registerGen,
  registerSolve,
];
