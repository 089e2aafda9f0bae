import type { Command } from 'commander';
import { register as check } from './check.js';
import { register as init } from './init.js';
import { register as schema } from './schema.js';
import { register as run } from './run.js';
import { register as status } from './status.js';
import { register as lineage } from './lineage.js';
import { register as retry } from './retry.js';
import { register as stop } from './stop.js';
import { register as task } from './task.js';
import { register as report } from './report.js';
import { register as audit } from './audit.js';
import { register as exportBundle } from './export.js';
import { register as revisions } from './revisions.js';

/** Every subcommand, one file each under src/cli/. */
export function registerCommands(program: Command): void {
  for (const register of [init, schema, run, status, retry, stop, task, lineage, check, report, audit, exportBundle, revisions]) register(program);
}
