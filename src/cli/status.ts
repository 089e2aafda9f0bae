import type { Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast (startup is part of `ratchet check`'s throughput).

/** `ratchet status CAMPAIGN [--json]` */
export function register(program: Command): void {
  program
    .command('status')
    .description('where a campaign stands: rounds by stages, task counts, gate verdicts, confident fractions, what blocks and what to do')
    .argument('<campaign>', 'the campaign YAML file')
    .option('--json', 'one JSON object on stdout')
    .action(async (campaign: string, o: { json?: boolean }) => {
      const { Output } = await import('../engine/output.js');
      const { campaignStatus, formatStatus } = await import('../engine/status.js');
      const r = await campaignStatus(campaign, (m) => process.stderr.write(`ratchet: ${m}\n`));
      if (r.report) {
        if (o.json) process.stdout.write(`${JSON.stringify(r.report, null, 2)}\n`);
        else formatStatus(r.report, new Output(process.stdout));
      }
      process.exitCode = r.exitCode;
    });
}
