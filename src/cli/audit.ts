import type { Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast.

/** `ratchet audit CAMPAIGN [--full] [--json]`: exit 0 clean, 1 when anything is off, 2 for bad input. */
export function register(program: Command): void {
  program
    .command('audit')
    .description('re-hash every registered artifact and report what is missing, changed or never registered, and whether the ledger is intact')
    .argument('<campaign>', 'the campaign YAML file (or its directory)')
    .option('--full', 'hash every file again, ignoring what the last audit found unchanged (size and mtime)')
    .option('--json', 'one JSON object on stdout')
    .action(async (campaign: string, o: { full?: boolean; json?: boolean }) => {
      const { stat } = await import('node:fs/promises');
      const { dirname, join, resolve } = await import('node:path');
      const { auditCampaign, renderAudit } = await import('../ledger/audit.js');
      const abs = resolve(campaign);
      const st = await stat(abs).catch(() => null);
      if (!st) {
        process.stderr.write(`ratchet audit: ${abs}: no such file or directory; expected the campaign YAML file or its directory\n`);
        process.exitCode = 2;
        return;
      }
      const dir = st.isDirectory() ? abs : dirname(abs);
      if (!(await stat(join(dir, '.ratchet')).catch(() => null))) {
        process.stderr.write(`ratchet audit: ${dir}: no .ratchet/ folder here: the campaign has not run in this directory\n`);
        process.exitCode = 2;
        return;
      }
      const r = await auditCampaign(dir, { full: o.full });
      process.stdout.write(o.json ? JSON.stringify(r, null, 1) + '\n' : renderAudit(r));
      process.exitCode = r.clean ? 0 : 1;
    });
}
