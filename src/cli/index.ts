#!/usr/bin/env node
import { Command } from 'commander';
import { registerCommands } from './commands.js';
import { VERSION } from '../version.js';

const program = new Command();
program
  .name('ratchet')
  .description('Run and check active-learning campaigns for machine-learned interatomic potentials.')
  .version(VERSION);
registerCommands(program);
program.parseAsync(process.argv).catch((err: unknown) => {
  process.stderr.write(`ratchet: ${err instanceof Error ? err.message : String(err)}\n`);
  process.exitCode = 2;
});
