import { InvalidArgumentError, type Command } from 'commander';
// The command's logic is imported when it runs, so every command starts fast (startup is part of `ratchet check`'s throughput).

function nonNegativeInt(name: string) {
  return (v: string): number => {
    if (!/^\d+$/.test(v)) throw new InvalidArgumentError(`${name} expects a whole number >= 0, found "${v}"`);
    return Number(v);
  };
}

type LineageFormat = 'text' | 'json' | 'prov-json' | 'dot';

function lineageFormat(v: string): LineageFormat {
  if (v === 'text' || v === 'json' || v === 'prov-json' || v === 'dot') return v;
  throw new InvalidArgumentError(`--format expects text, json, prov-json or dot, found "${v}"`);
}

/** `ratchet lineage PATH|ARTIFACT`: what made this artifact (or, with --down, what was made from it). */
export function register(program: Command): void {
  program
    .command('lineage')
    .description('show what an artifact was made from (or, with --down, what was made from it), back to the starting structures')
    .argument('<target>', 'a file or directory of the campaign, or an artifact id (sha256:<hex> or a unique hex prefix)')
    .option('--json', 'print one JSON object instead of a tree')
    .option('--campaign <file|dir>', 'the campaign file (it must own the folder\'s state) or its directory (default: the nearest directory above the path holding .ratchet/)')
    .option('--down', 'downstream: what was made from this artifact')
    .option('--frame <index>', 'also follow frame INDEX (0-based) back through frame-selection files', nonNegativeInt('--frame'))
    .option('--depth <n>', 'expand the tree at most N levels', nonNegativeInt('--depth'))
    .option('--format <format>', 'text (default), json, prov-json (W3C PROV-JSON) or dot (Graphviz)', lineageFormat)
    .option('--with-user', 'prov-json/dot: name the person running this (login name) as an agent')
    .action(async (target: string, opts: { json?: boolean; campaign?: string; down?: boolean; frame?: number; depth?: number; format?: LineageFormat; withUser?: boolean }) => {
      const { LineageQueryError, lineageQuery, renderAnswer } = await import('../ledger/query.js');
      try {
        const answer = await lineageQuery({
          target,
          campaign: opts.campaign,
          down: opts.down,
          frame: opts.frame,
          maxDepth: opts.depth,
        });
        if (opts.format === 'prov-json' || opts.format === 'dot') {
          const { campaignProv, provDot } = await import('../ledger/prov.js');
          const { VERSION } = await import('../version.js');
          const user = opts.withUser ? (await import('node:os')).userInfo().username : undefined;
          const doc = await campaignProv(answer.campaign, answer.tree, { toolVersion: VERSION, user });
          process.stdout.write(opts.format === 'dot' ? provDot(doc) : JSON.stringify(doc, null, 2) + '\n');
          return;
        }
        process.stdout.write(opts.json || opts.format === 'json' ? JSON.stringify(answer, null, 2) + '\n' : renderAnswer(answer));
      } catch (err) {
        if (!(err instanceof LineageQueryError)) throw err;
        process.stderr.write(`ratchet: ${err.message}\n`);
        process.exitCode = err.exitCode;
      }
    });
}
