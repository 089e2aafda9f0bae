import { InvalidArgumentError, type Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast.

/** `ratchet export CAMPAIGN DIR [--round K]` and `ratchet export --verify DIR`: exit 0 done/verified, 1 not verified, 2 bad input. */
export function register(program: Command): void {
  program
    .command('export')
    .description('write a bundle to hand over: the committee, the labeled data set (train and held-out), the campaign file, the report, PROV-JSON provenance and a manifest of sha256 hashes')
    .argument('[campaign]', 'the campaign YAML file')
    .argument('[dir]', 'a new or empty folder for the bundle')
    .option('--round <k>', 'export this round\'s committee and data set (default: the latest round with a trained committee)', (v: string) => {
      if (!/^\d+$/.test(v)) throw new InvalidArgumentError(`--round expects a whole number >= 0, found "${v}"`);
      return Number(v);
    })
    .option('--verify <dir>', 're-check a bundle: every file of its manifest present with its sha256, nothing extra')
    .action(async (campaign: string | undefined, dir: string | undefined, o: { round?: number; verify?: string }) => {
      const { exportCampaign, verifyBundle, renderVerify, ExportError } = await import('../report/export.js');
      const { ReportError } = await import('../report/index.js');
      try {
        if (o.verify !== undefined) {
          const r = await verifyBundle(o.verify);
          process.stdout.write(renderVerify(r));
          process.exitCode = r.clean ? 0 : 1;
          return;
        }
        if (!campaign || !dir) {
          process.stderr.write('ratchet export: expected CAMPAIGN and DIR (the campaign file and a new folder for the bundle), or --verify DIR\n');
          process.exitCode = 2;
          return;
        }
        const m = await exportCampaign(campaign, dir, { round: o.round });
        process.stdout.write(
          `wrote ${dir}: round ${m.round}'s committee (${m.files.filter((f) => f.role === 'model').length} file(s)), data set, campaign, report, provenance; ${m.files.length} files in ${'manifest.json'}\n` +
            (m.validation !== 'pass' ? `note: round ${m.round}'s validation verdict is ${m.validation ?? 'not given yet'}: this committee is not validated\n` : ''),
        );
      } catch (err) {
        if (!(err instanceof ExportError) && !(err instanceof ReportError)) throw err;
        process.stderr.write(`ratchet export: ${err.message}\n`);
        process.exitCode = 2;
      }
    });
}
