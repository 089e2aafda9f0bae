import type { Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast (startup is part of `ratchet check`'s throughput).

/** `ratchet stop CAMPAIGN [TARGET] [--reason TEXT]` */
export function register(program: Command): void {
  program
    .command('stop')
    .description("stop a campaign's queued and running tasks (all, a stage like r1/label, or a task like r1/label/0003) and hold them: no run starts them again until ratchet retry releases them")
    .argument('<campaign>', 'the campaign YAML file')
    .argument('[target]', 'a stage (r1/label) or a task (r1/label/0003); default: the whole campaign')
    .option('--reason <text>', 'why (recorded in the ledger with your user name and the time)')
    .option('--backend <name>', "where the tasks run (default: the campaign's backend.kind)")
    .option('--wait <seconds>', 'how long to wait, in seconds, for a running ratchet run to record the stop before cancelling the jobs from here (default 30)')
    .addHelpText('after', '\nA ratchet run --follow of the campaign in another terminal records the stop at its next poll and ends.\nExit codes: 0 stopped (or handed to the running ratchet), 1 the jobs could not be cancelled, 2 bad input.')
    .action(async (campaign: string, target: string | undefined, o: { reason?: string; backend?: string; wait?: string }) => {
      const waitS = o.wait === undefined ? undefined : Number(o.wait);
      if (waitS !== undefined && !(Number.isFinite(waitS) && waitS >= 0)) {
        process.stderr.write(`ratchet stop: --wait: expected a number of seconds >= 0, found ${JSON.stringify(o.wait)}\n`);
        process.exitCode = 2;
        return;
      }
      const { stopCampaign } = await import('../engine/stop-command.js');
      const r = await stopCampaign({ campaign, target, reason: o.reason, backend: o.backend, waitS });
      process.exitCode = r.exitCode;
    });
}
