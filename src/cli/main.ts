/** The command line: every subcommand registered with commander (loaded by index.ts after its early start-up work). */
import { Command } from 'commander';
import { registerCommands } from './commands.js';
import { VERSION } from '../version.js';
import { oneVoice, reportTopLevel } from './errors.js';

const program = new Command();
program
  .name('ratchet')
  .description('Run and check active-learning campaigns for machine-learned interatomic potentials.')
  .version(VERSION)
  // Usage errors (unknown option, missing argument) are bad input: exit 2. Help and version exit 0.
  .exitOverride((err) => process.exit(err.exitCode === 0 ? 0 : 2));
// Usage errors in one voice with every other message (subcommands inherit it).
oneVoice(program);
registerCommands(program);
// `ratchet help check contacts` shows the page of `ratchet check contacts --help` (commander's help command takes one word).
const argv = [...process.argv];
if (argv[2] === 'help' && argv.length > 4) argv.splice(2, argv.length - 2, ...argv.slice(3), '--help');
program.parseAsync(argv).catch((err: unknown) => {
  process.exitCode = reportTopLevel(err);
});
