import type { Command } from 'commander';

/** A subcommand registers itself on the program. Add one line per command below. */
export type RegisterCommand = (program: Command) => void;

export const COMMANDS: RegisterCommand[] = [
];
