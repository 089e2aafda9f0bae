import { Option, type Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast (startup is part of `ratchet check`'s throughput).

/** The old name of --stop-before: refused with the new name (exit 2). */
export function renamedUntil(): Option {
  return new Option('--until <point>', 'renamed: use --stop-before').hideHelp();
}

/** The message for a command line that still says --until. */
export function untilRenamed(command: string): string {
  return `ratchet ${command}: --until was renamed: use --stop-before POINT (stops before POINT), or --stop-after POINT (runs POINT, then stops)\n`;
}

/** `ratchet run CAMPAIGN [--backend local] [-j N] [--stop-before POINT | --stop-after POINT] [-n] [-q|-v]` */
export function register(program: Command): void {
  program
    .command('run')
    .description('run a campaign: plan, run and judge its stages until it converges, is blocked, or reaches --stop-before/--stop-after (resumes where it stopped)')
    .argument('<campaign>', 'the campaign YAML file')
    .option('--backend <name>', "where tasks run (default: the campaign's backend.kind)")
    .option('-j, --jobs <n>', 'tasks at once on the local backend, a whole number (default: backend.jobs, else the number of cores)')
    .option('--stop-before <point>', 'stop before a round (2), a stage of a round (r1/train) or the next occurrence of a stage (train)')
    .option('--stop-after <point>', 'run up to and including a round (2), a stage of a round (r1/train) or the next occurrence of a stage (train), then stop')
    .addOption(renamedUntil())
    .option('-n, --dry-run', 'plan the rest of the current round in .ratchet/plan/<time>/ (the built-in sample runs there) and print what would run; runs no stage program, writes no ledger event')
    .option('--preflight', "plan the rest of the current round and check every script (bash -n, and the scheduler's own check such as sbatch --test-only); submits nothing")
    .option('-q, --quiet', 'no progress lines (verdicts, notes and the outcome still print)')
    .option('-v, --verbose', 'also a line per task event: submitted (with the job id), started, ended (exit code and reason)')
    .option('--allow-over-budget', 'submit even when the core-hour estimate exceeds budget.core_hours or budget.core_hours_per_round (recorded in the ledger)')
    .option('--follow', 'on a cluster backend, keep polling until the stage\'s tasks end (local always waits)')
    .option('--accept-revision', 'the campaign file changed settings that labels already made depend on: keep those labels and go on (recorded in the ledger)')
    .option('--relabel', 'the campaign file changed settings that labels already made depend on: label those frames again in the next label stage and drop the earlier labels from the data sets (recorded in the ledger)')
    .addHelpText('after', '\nHeld tasks (stopped by ratchet stop, or cancelled with the scheduler\'s own command) are never started again by run: release them with ratchet retry CAMPAIGN TASK|STAGE.\nExit codes: 0 finished or advanced, 1 blocked by a gate, failed or held tasks, 2 bad input, 130 interrupted.')
    .action(async (campaign: string, o: { backend?: string; jobs?: string; stopBefore?: string; stopAfter?: string; until?: string; dryRun?: boolean; quiet?: boolean; verbose?: boolean; follow?: boolean; preflight?: boolean; allowOverBudget?: boolean; acceptRevision?: boolean; relabel?: boolean }) => {
      if (o.until !== undefined) {
        process.stderr.write(untilRenamed('run'));
        process.exitCode = 2;
        return;
      }
      const { runCampaign } = await import('../engine/run.js');
      const r = await runCampaign({
        campaign,
        backend: o.backend,
        jobs: o.jobs,
        stopBefore: o.stopBefore,
        stopAfter: o.stopAfter,
        dryRun: o.dryRun,
        quiet: o.quiet,
        verbose: o.verbose,
        follow: o.follow,
        preflight: o.preflight,
        allowOverBudget: o.allowOverBudget,
        acceptRevision: o.acceptRevision,
        relabel: o.relabel,
        handleSignals: true,
      });
      process.exitCode = r.exitCode;
    });
}
