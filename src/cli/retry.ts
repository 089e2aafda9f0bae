import type { Command } from 'commander';
import { renamedUntil, untilRenamed } from './run.js';
// The command's logic is imported when it runs, so every command starts fast (startup is part of `ratchet check`'s throughput).

/** `ratchet retry CAMPAIGN TASK|STAGE` */
export function register(program: Command): void {
  program
    .command('retry')
    .description('run failed tasks again as new attempts, and release held tasks (stopped by ratchet stop or cancelled with the scheduler\'s own command), then go on like run')
    .argument('<campaign>', 'the campaign YAML file')
    .argument('<target>', 'a task (r0/label/0003) or a stage (r0/label: its failed and held tasks); a gate-blocked stage with no failed task is judged again')
    .option('--backend <name>', "where tasks run (default: the campaign's backend.kind)")
    .option('-j, --jobs <n>', 'tasks at once on the local backend, a whole number')
    .option('-q, --quiet', 'no progress lines')
    .option('-v, --verbose', 'also a line per task event')
    .option('--stop-before <point>', 'stop before a round, a stage of a round or a stage, as for run')
    .option('--stop-after <point>', 'run up to and including a round, a stage of a round or a stage, as for run')
    .addOption(renamedUntil())
    .option('--allow-over-budget', 'submit even when the core-hour estimate exceeds the budget (recorded in the ledger)')
    .option('--follow', "on a cluster backend, keep polling until the stage's tasks end")
    .addHelpText('after', '\nReleasing a held task records your user name in the ledger (task_released).\nExit codes: 0 finished or advanced, 1 blocked, 2 bad input (including a target that cannot be retried), 130 interrupted.')
    .action(async (campaign: string, target: string, o: { backend?: string; jobs?: string; stopBefore?: string; stopAfter?: string; until?: string; allowOverBudget?: boolean; follow?: boolean; quiet?: boolean; verbose?: boolean }) => {
      if (o.until !== undefined) {
        process.stderr.write(untilRenamed('retry'));
        process.exitCode = 2;
        return;
      }
      const { runCampaign } = await import('../engine/run.js');
      const r = await runCampaign({ campaign, retry: target, backend: o.backend, jobs: o.jobs, stopBefore: o.stopBefore, stopAfter: o.stopAfter, allowOverBudget: o.allowOverBudget, follow: o.follow, quiet: o.quiet, verbose: o.verbose, handleSignals: true });
      process.exitCode = r.exitCode;
    });
}
