import { InvalidArgumentError, type Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast (startup is part of `ratchet check`'s throughput).

function lineCount(v: string): number {
  if (!/^\d+$/.test(v) || Number(v) < 1) throw new InvalidArgumentError(`-n expects a whole number of lines >= 1, found "${v}"`);
  return Number(v);
}

/** `ratchet task CAMPAIGN TASK_ID [-n LINES] [--follow] [--json]` */
export function register(program: Command): void {
  program
    .command('task')
    .description("show one task: state, attempts, hold, command, the last lines of its logs, its exit record, and the scheduler's own account of its job")
    .argument('<campaign>', 'the campaign YAML file')
    .argument('<task>', 'a task like r0/label/0003')
    .option('-n, --lines <n>', 'last lines of stderr.log and stdout.log to show (default 20)', lineCount, 20)
    .option('--follow', "print what the task writes to its logs until it ends")
    .option('--no-scheduler', "do not ask the scheduler for its account of the job")
    .option('--json', 'one JSON object on stdout')
    .addHelpText('after', '\nExit codes: 0 shown, 2 bad input (an unknown campaign or task).')
    .action(async (campaign: string, id: string, o: { lines: number; follow?: boolean; json?: boolean; scheduler: boolean }) => {
      const { TaskViewError, followTask, formatTask, taskReport } = await import('../engine/task-view.js');
      try {
        const r = await taskReport(campaign, id, o.lines, o.scheduler);
        if (o.json) process.stdout.write(`${JSON.stringify(r, null, 2)}\n`);
        else formatTask(r, (l) => process.stdout.write(`${l}\n`));
        if (o.follow && !r.exit) {
          if (!o.json) process.stdout.write(`--- following ${r.task} until it ends (Ctrl-C to stop watching; the task goes on)\n`);
          const exit = await followTask(r.dir, (s) => process.stdout.write(s));
          if (!o.json && exit) process.stdout.write(`--- ${r.task} ended: exit code ${exit.exit_code}\n`);
        }
      } catch (err) {
        if (!(err instanceof TaskViewError)) throw err;
        process.stderr.write(`ratchet task: ${err.message}\n`);
        process.exitCode = 2;
      }
    });
}
