import { InvalidArgumentError, type Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast (startup is part of `ratchet check`'s throughput).

function nonNegativeInt(name: string) {
  return (v: string): number => {
    if (!/^\d+$/.test(v)) throw new InvalidArgumentError(`${name} expects a whole number >= 0, found "${v}"`);
    return Number(v);
  };
}

/** `ratchet lineage PATH|ARTIFACT`: what made this artifact (or, with --down, what was made from it). */
export function register(program: Command): void {
  program
    .command('lineage')
    .description('show what an artifact was made from (or, with --down, what was made from it), back to the starting structures')
    .argument('<target>', 'a file or directory of the campaign, or an artifact id (sha256:<hex> or a unique hex prefix)')
    .option('--json', 'print one JSON object instead of a tree')
    .option('--campaign <dir>', 'the campaign directory (default: the nearest directory above the path holding .ratchet/)')
    .option('--down', 'downstream: what was made from this artifact')
    .option('--frame <index>', 'also follow frame INDEX (0-based) back through frame-selection files', nonNegativeInt('--frame'))
    .option('--depth <n>', 'expand the tree at most N levels', nonNegativeInt('--depth'))
    .action(async (target: string, opts: { json?: boolean; campaign?: string; down?: boolean; frame?: number; depth?: number }) => {
      const { LineageQueryError, lineageQuery, renderAnswer } = await import('../ledger/query.js');
      try {
        const answer = await lineageQuery({
          target,
          campaign: opts.campaign,
          down: opts.down,
          frame: opts.frame,
          maxDepth: opts.depth,
        });
        process.stdout.write(opts.json ? JSON.stringify(answer, null, 2) + '\n' : renderAnswer(answer));
      } catch (err) {
        if (!(err instanceof LineageQueryError)) throw err;
        process.stderr.write(`ratchet lineage: ${err.message}\n`);
        process.exitCode = err.exitCode;
      }
    });
}
