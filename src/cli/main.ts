import { readFileSync } from 'node:fs';
import { Command, CommanderError } from 'commander';
import { exitCodeFor, PairflowError } from '../errors.js';
import { COMMANDS } from './commands/index.js';

/** Reads the package version from package.json, one level above dist/ or src/. */
export function packageVersion(): string {
  const url = new URL('../../package.json', import.meta.url);
  return (JSON.parse(readFileSync(url, 'utf8')) as { version: string }).version;
}

/** Builds the `pairflow` program with every registered subcommand. */
export function buildProgram(): Command {
  const program = new Command('pairflow')
    .description('Online min-cost matching of supply and demand over event logs and Kafka.')
    .version(packageVersion(), '-V, --version')
    .exitOverride()
    .configureOutput({
      // Commander's own usage errors become one line on stderr (SPEC §6).
      outputError: (str, write) => write(`pairflow: ${str.split('\n')[0]!.replace(/^error: /, '')} (see --help)\n`),
    });
  for (const register of COMMANDS) register(program);
  return program;
}

/**
 * Runs the CLI and resolves to its exit status: 0 success, 2 usage or input error,
 * 1 anything else (SPEC §6). Errors are printed as one line on stderr.
 */
export async function main(argv: string[]): Promise<number> {
  const program = buildProgram();
  for (const cmd of program.commands) cmd.exitOverride();
  try {
    await program.parseAsync(argv);
    return 0;
  } catch (err) {
    if (err instanceof CommanderError) {
      if (err.code === 'commander.helpDisplayed' || err.code === 'commander.version' || err.code === 'commander.help') return 0;
      return 2;
    }
    if (err instanceof PairflowError) {
      process.stderr.write(`pairflow: ${err.message} [${err.code}]\n`);
      return exitCodeFor(err);
    }
    const message = err instanceof Error ? (err.stack ?? err.message) : String(err);
    process.stderr.write(`pairflow: internal error: ${message.split('\n')[0]}\n`);
    if (process.env.PAIRFLOW_DEBUG) process.stderr.write(`${message}\n`);
    return 1;
  }
}
