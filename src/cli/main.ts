/** The command line: every subcommand registered with commander (loaded by index.ts after its early start-up work). */
import { Command } from 'commander';
import { registerCommands } from './commands.js';
import { VERSION } from '../version.js';

const program = new Command();
program
  .name('ratchet')
  .description('Run and check active-learning campaigns for machine-learned interatomic potentials.')
  .version(VERSION)
  // Usage errors (unknown option, missing argument) are bad input: exit 2. Help and version exit 0.
  .exitOverride((err) => process.exit(err.exitCode === 0 ? 0 : 2));
registerCommands(program);
program.parseAsync(process.argv).catch((err: unknown) => {
  process.stderr.write(`ratchet: ${err instanceof Error ? err.message : String(err)}\n`);
  process.exitCode = 2;
});
