/**
 * `ratchet init --example NAME DIR`: a runnable copy of one of the example campaigns shipped with
 * ratchet, written into any folder. The copy's commands name the installed package's programs by
 * absolute path, so it runs with plain `node` (argon: the stage programs compiled to
 * dist/demo/examples/argon/*.js by `npm run build`) or /usr/bin/python3 (water-xtb: the Python programs
 * are copied beside the campaign with python/ratchet_task.py, to be read and edited).
 */
import { access, copyFile, mkdir, readFile, writeFile } from 'node:fs/promises';
import { join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { shellQuote } from '../backends/shell.js';
import { InitError } from './starter.js';

/** The package's root folder (this file is src/campaign/examples.ts or dist/campaign/examples.js). */
export const PACKAGE_ROOT = fileURLToPath(new URL('../../', import.meta.url));

export interface ExampleSpec {
  /** One line for `ratchet init --help` and error messages. */
  summary: string;
  /** Folder under examples/. */
  folder: string;
  /** Files copied as they are (relative to the folder). */
  files: string[];
  /** Files copied from elsewhere in the package: [path in the package, name in the copy]. */
  extra?: [string, string][];
  /** The campaign text of the copy, from the example's campaign.yaml. */
  rewrite(text: string, root: string): string;
}

const yamlString = (s: string) => JSON.stringify(s);

/** The argon demo's stage programs compiled by `npm run build` (tsconfig.examples.json). */
export const ARGON_COMPILED = 'dist/demo/examples/argon';

export const EXAMPLES: Record<string, ExampleSpec> = {
  argon: {
    summary: 'argon from the cold fcc crystal to the liquid (Lennard-Jones reference, a linear pair potential; Node only)',
    folder: 'examples/argon',
    files: ['start-fcc.xyz', 'start-liquid.xyz'],
    rewrite(text, root) {
      const compiled = join(root, ARGON_COMPILED);
      return text
        .replace(/^(\s*command:\s*)node --import tsx "\$RATCHET_CAMPAIGN_DIR\/([a-z-]+)\.ts"\s*$/gm, (_m, head: string, prog: string) =>
          `${head}${yamlString(`node ${shellQuote(join(compiled, `${prog}.js`))}`)}`,
        )
        .replace(/^# are small TypeScript programs beside this file\. Run it with `npm start` from the repository\.$/m,
          `# are small TypeScript programs of the ratchet package, run here compiled from\n# ${compiled}/ (written by \`ratchet init --example argon\`).`);
    },
  },
  'water-xtb': {
    summary: 'one water molecule in the gas phase: GFN2-xTB (xtb) labels, ASE runs the MD, a numpy committee (needs /usr/bin/python3 with ASE, numpy and xtb)',
    folder: 'examples/water-xtb',
    files: ['start-water.xyz', 'label.py', 'train.py', 'md.py', 'validate.py', 'model.py', 'README.md'],
    extra: [['python/ratchet_task.py', 'ratchet_task.py']],
    rewrite: (text) => text,
  },
};

export function exampleNames(): string[] {
  return Object.keys(EXAMPLES);
}

/**
 * Write example `name` into `dir` (created when missing): campaign.yaml and the files it needs.
 * Refuses (InitError) an unknown name, a file that already exists, or an argon copy when the package
 * has not been built (its compiled programs are missing).
 */
export async function writeExample(name: string, dir: string, root: string = PACKAGE_ROOT): Promise<{ campaign: string; files: string[] }> {
  const spec = EXAMPLES[name];
  if (!spec) throw new InitError(`--example: unknown example '${name}': expected one of ${exampleNames().join(', ')}`);
  const target = resolve(dir);
  const src = join(root, spec.folder);
  if (name === 'argon' && !(await exists(join(root, ARGON_COMPILED, 'label.js')))) {
    throw new InitError(`${join(root, ARGON_COMPILED)}: the compiled argon programs are missing; run \`npm run build\` in ${root} first`);
  }
  const copies: [string, string][] = [...spec.files.map((f) => [join(src, f), f] as [string, string]), ...(spec.extra ?? []).map(([p, f]) => [join(root, p), f] as [string, string])];
  const campaign = join(target, 'campaign.yaml');
  for (const p of [campaign, ...copies.map(([, f]) => join(target, f))]) {
    if (await exists(p)) throw new InitError(`${p}: already exists; not overwriting it (choose another directory or move the file)`);
  }
  const text = spec.rewrite(await readFile(join(src, 'campaign.yaml'), 'utf8'), root);
  await mkdir(target, { recursive: true });
  const written: string[] = [];
  for (const [from, to] of copies) {
    await copyFile(from, join(target, to));
    written.push(join(target, to));
  }
  await writeFile(campaign, text);
  return { campaign, files: written };
}

async function exists(p: string): Promise<boolean> {
  try {
    await access(p);
    return true;
  } catch {
    return false;
  }
}
