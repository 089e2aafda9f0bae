import type { Command } from 'commander';
import { Output } from '../engine/output.js';
import { campaignStatus, formatStatus } from '../engine/status.js';

/** `ratchet status CAMPAIGN [--json]` */
export function register(program: Command): void {
  program
    .command('status')
    .description('where a campaign stands: rounds by stages, task counts, gate verdicts, confident fractions, what blocks and what to do')
    .argument('<campaign>', 'the campaign YAML file')
    .option('--json', 'one JSON object on stdout')
    .action(async (campaign: string, o: { json?: boolean }) => {
      const r = await campaignStatus(campaign, (m) => process.stderr.write(`ratchet: ${m}\n`));
      if (r.report) {
        if (o.json) process.stdout.write(`${JSON.stringify(r.report, null, 2)}\n`);
        else formatStatus(r.report, new Output(process.stdout));
      }
      process.exitCode = r.exitCode;
    });
}
