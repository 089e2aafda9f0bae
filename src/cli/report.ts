import type { Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast.

/** `ratchet report CAMPAIGN [-o FILE] [--json]` */
export function register(program: Command): void {
  program
    .command('report')
    .description('write one self-contained HTML file of the campaign: confident fractions, spreads, errors, parity, drift, counts, core-hours, verdicts, lineage')
    .argument('<campaign>', 'the campaign YAML file')
    .option('-o, --output <file>', 'where to write the HTML (default: report.html beside the campaign file)')
    .option('--json', 'write the data behind every chart as one JSON object on stdout instead')
    .action(async (campaign: string, o: { output?: string; json?: boolean }) => {
      const { buildReport, ReportError } = await import('../report/index.js');
      const { writeFile } = await import('node:fs/promises');
      const { dirname, join, resolve } = await import('node:path');
      try {
        const r = await buildReport(campaign);
        if (o.json) {
          process.stdout.write(JSON.stringify(r.data, null, 1) + '\n');
          return;
        }
        const out = resolve(o.output ?? join(dirname(resolve(campaign)), 'report.html'));
        await writeFile(out, r.html);
        const drawn = r.charts.filter((c) => c.svg).length;
        process.stdout.write(`wrote ${out}: ${drawn} of ${r.charts.length} charts drawn${drawn < r.charts.length ? ` (no data yet for ${r.charts.filter((c) => !c.svg).map((c) => c.id).join(', ')})` : ''}\n`);
      } catch (err) {
        if (!(err instanceof ReportError)) throw err;
        process.stderr.write(`ratchet report: ${err.message}\n`);
        process.exitCode = 2;
      }
    });
}
