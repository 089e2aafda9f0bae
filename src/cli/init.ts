import type { Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast (startup is part of `ratchet check`'s throughput).
import { relative } from 'node:path';

/** `ratchet init [DIR]`: write a commented starter campaign and a tiny starting structure. */
export function register(program: Command): void {
  program
    .command('init')
    .description('write a commented starter campaign (campaign.yaml) and a small starting structure into DIR')
    .argument('[dir]', 'directory to write into (created when missing)', '.')
    .action(async (dir: string) => {
      const { InitError, writeStarter } = await import('../campaign/starter.js');
      try {
        const written = await writeStarter(dir);
        const show = (p: string) => {
          const rel = relative(process.cwd(), p);
          return rel && !rel.startsWith('..') ? rel : p;
        };
        process.stdout.write(
          `wrote ${show(written.campaign)}\nwrote ${show(written.structure)}\n` +
            `next: edit the lines marked "edit" (species, start, commands, resources), then\n` +
            `  ratchet schema ${show(written.campaign)}     # check it\n` +
            `  ratchet run ${show(written.campaign)} --dry-run\n`,
        );
      } catch (err) {
        if (!(err instanceof InitError)) throw err;
        process.stderr.write(`ratchet init: ${err.message}\n`);
        process.exitCode = 2;
      }
    });
}
