import type { Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast (startup is part of `ratchet check`'s throughput).
import { relative } from 'node:path';

/** `ratchet init [DIR]`: write a commented starter campaign and a tiny starting structure. */
export function register(program: Command): void {
  program
    .command('init')
    .description('write a commented starter campaign (campaign.yaml) and a small starting structure into DIR')
    .argument('[dir]', 'directory to write into (created when missing)', '.')
    .option('--example <name>', 'write a runnable copy of an example campaign instead: argon (Node only) or water-xtb (xtb, ASE, numpy)')
    .action(async (dir: string, opts: { example?: string }) => {
      const { InitError, writeStarter } = await import('../campaign/starter.js');
      const { checkTargetDir, TargetDirError } = await import('../campaign/target-dir.js');
      try {
        // Refuse a target that cannot be a directory (a file, /proc, an unwritable place) before anything else.
        await checkTargetDir(dir);
        if (opts.example !== undefined) {
          const { writeExample } = await import('../campaign/examples.js');
          const ex = await writeExample(opts.example, dir);
          const rel = relative(process.cwd(), ex.campaign);
          const shown = rel && !rel.startsWith('..') ? rel : ex.campaign;
          process.stdout.write(
            `wrote ${shown} and ${ex.files.length} file(s) beside it (example ${opts.example})\n` +
              `next:\n  ratchet run ${shown} --dry-run\n  ratchet run ${shown}\n`,
          );
          return;
        }
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
        if (!(err instanceof InitError) && !(err instanceof TargetDirError)) throw err;
        process.stderr.write(`ratchet: ${err.message}\n`);
        process.exitCode = 2;
      }
    });
}
