import { readFileSync } from 'node:fs';
import { Command, CommanderError } from 'commander';
import { readEnv } from '../env.js';
import { exitCodeFor, PairflowError } from '../errors.js';
import { COMMANDS } from './commands/index.js';
import { flushOut, isClosedPipe, watchStdout } from './stdout.js';

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
 * 1 anything else (SPEC §6). Errors are printed as one line on stderr. The result on
 * stdout counts as written only once stdout has taken it: a failed write (a full
 * disk) is exit 1, a reader that went away (`| head`) ends quietly with 0.
 */
export async function main(argv: string[]): Promise<number> {
  watchStdout();
  const program = buildProgram();
  for (const cmd of program.commands) cmd.exitOverride();
  try {
    await program.parseAsync(argv);
    await flushOut();
    return 0;
  } catch (err) {
    if (isClosedPipe(err)) return 0;
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
    if (readEnv().debug) process.stderr.write(`${message}\n`);
    return 1;
  }
}
