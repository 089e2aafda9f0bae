import type { Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast (startup is part of `ratchet check`'s throughput).

/** `ratchet revisions CAMPAIGN [A [B]] [--json]` */
export function register(program: Command): void {
  program
    .command('revisions')
    .description('the recorded versions of the campaign file (revisions) and the rounds they ran from; with A (and B) the differences between two of them')
    .argument('<campaign>', 'the campaign YAML file')
    .argument('[a]', 'a revision: its number (1, 2, ...) or a prefix of its sha256')
    .argument('[b]', 'another revision (default: the one in force)')
    .option('--json', 'one JSON object on stdout')
    .addHelpText('after', '\nExit codes: 0 done, 2 bad input (a campaign or ledger that cannot be read, an unknown revision).')
    .action(async (campaign: string, a: string | undefined, b: string | undefined, o: { json?: boolean }) => {
      const { Output } = await import('../engine/output.js');
      const { revisionsCommand } = await import('../engine/revisions.js');
      process.exitCode = await revisionsCommand(campaign, a, b, {
        json: o.json,
        out: new Output(process.stdout),
        error: (m) => process.stderr.write(`ratchet: ${m}\n`),
      });
    });
}
