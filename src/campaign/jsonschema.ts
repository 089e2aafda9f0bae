/**
 * The campaign's JSON Schema (draft 2020-12) for editors, generated from the zod schema.
 * It describes the file as written (the input side: walltime strings, memory strings, defaults).
 * Checks that JSON Schema cannot express (element symbols, unique names, lower < upper, files that exist)
 * are made by `loadCampaign` only.
 */
import { z } from 'zod';
import { CampaignSchema } from './schema.js';

export type JsonSchema = Record<string, unknown>;

let cached: JsonSchema | undefined;

/** The JSON Schema of a campaign file. A fresh deep copy on every call, so callers may change it. */
export function campaignJsonSchema(): JsonSchema {
  cached ??= {
    ...allowEmptySections(z.toJSONSchema(CampaignSchema, { io: 'input', target: 'draft-2020-12' }) as JsonSchema),
    title: 'ratchet campaign',
    description:
      'One active-learning campaign for a machine-learned interatomic potential: species, starting structures, ' +
      'committee, exploration conditions, the five stages (sample, label, train, validate, simulate), backend and budget. ' +
      'Units: Å, eV/Å, K, bar, fs; walltimes "HH:MM:SS"; memory "4G".',
  };
  return structuredClone(cached);
}

/**
 * The loader reads a section left empty (`budget:` with only comments under it) as its defaults, so the
 * schema lets every nested mapping with fixed keys be null as well.
 */
function allowEmptySections(root: JsonSchema): JsonSchema {
  const visit = (node: JsonSchema, nested: boolean) => {
    if (nested && node.type === 'object' && node.properties) node.type = ['object', 'null'];
    for (const child of Object.values((node.properties as Record<string, JsonSchema>) ?? {})) visit(child, true);
    if (node.items && typeof node.items === 'object') visit(node.items as JsonSchema, false);
    for (const branch of (node.anyOf as JsonSchema[]) ?? []) visit(branch, nested);
  };
  visit(root, false);
  return root;
}

/** The JSON Schema node describing the value at a key path (undefined when the path leaves the schema). */
export function schemaAt(root: JsonSchema, path: readonly (string | number)[]): JsonSchema | undefined {
  let node: JsonSchema | undefined = root;
  for (const seg of path) {
    node = node === undefined ? undefined : step(node, seg);
    if (node === undefined) return undefined;
  }
  return node;
}

function step(node: JsonSchema, seg: string | number): JsonSchema | undefined {
  const props = node.properties as Record<string, JsonSchema> | undefined;
  if (typeof seg === 'string' && props && seg in props) return props[seg];
  if (typeof seg === 'number' && node.items && typeof node.items === 'object') return node.items as JsonSchema;
  if (typeof seg === 'string' && node.additionalProperties && typeof node.additionalProperties === 'object') {
    return node.additionalProperties as JsonSchema;
  }
  for (const branch of [...((node.anyOf as JsonSchema[]) ?? []), ...((node.oneOf as JsonSchema[]) ?? [])]) {
    const found = step(branch, seg);
    if (found) return found;
  }
  return undefined;
}

/** The keys an object at this key path accepts (empty when it is not an object with fixed keys). */
export function keysAt(root: JsonSchema, path: readonly (string | number)[]): string[] {
  const node = schemaAt(root, path);
  if (!node) return [];
  const props = node.properties as Record<string, unknown> | undefined;
  if (props) return Object.keys(props);
  for (const branch of [...((node.anyOf as JsonSchema[]) ?? [])]) {
    const p = branch.properties as Record<string, unknown> | undefined;
    if (p) return Object.keys(p);
  }
  return [];
}

/** Every place a key name is valid, as key paths ("stages.label.frames_per_task"), for "belongs under" hints. */
export function keyIndex(root: JsonSchema): Map<string, string[]> {
  const index = new Map<string, string[]>();
  const visit = (node: JsonSchema, prefix: string) => {
    const props = node.properties as Record<string, JsonSchema> | undefined;
    if (props) {
      for (const [key, child] of Object.entries(props)) {
        const p = prefix ? `${prefix}.${key}` : key;
        index.set(key, [...(index.get(key) ?? []), p]);
        visit(child, p);
      }
    }
    if (node.items && typeof node.items === 'object') visit(node.items as JsonSchema, `${prefix}[]`);
    for (const branch of (node.anyOf as JsonSchema[]) ?? []) visit(branch, prefix);
  };
  visit(root, '');
  return index;
}
