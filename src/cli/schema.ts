import type { Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast (startup is part of `ratchet check`'s throughput).

/** `ratchet schema [CAMPAIGN]`: print the campaign JSON Schema, or check a campaign file against the full rules. */
export function register(program: Command): void {
  program
    .command('schema')
    .description('print the JSON Schema of campaign files (for editors); with CAMPAIGN, check that file instead')
    .argument('[campaign]', 'a campaign file to check (schema, element symbols, names, files it refers to)')
    .action(async (campaign: string | undefined) => {
      const { campaignJsonSchema } = await import('../campaign/jsonschema.js');
      const { CampaignError, loadCampaign } = await import('../campaign/load.js');
      if (campaign === undefined) {
        process.stdout.write(JSON.stringify(campaignJsonSchema(), null, 2) + '\n');
        return;
      }
      try {
        const loaded = await loadCampaign(campaign);
        const c = loaded.campaign;
        process.stdout.write(
          `${campaign}: valid campaign "${c.name}": ${c.species.join(' ')}, ${c.start.length} starting structure file(s), ` +
            `${c.conditions.length} condition(s), committee of ${c.committee.size}, backend ${c.backend.kind}, sha256 ${loaded.sha256.slice(0, 12)}\n`,
        );
      } catch (err) {
        if (!(err instanceof CampaignError)) throw err;
        process.stderr.write(`ratchet: ${err.message}\n`); // one voice with run: the same words, the same prefix
        process.exitCode = 2;
      }
    });
}
