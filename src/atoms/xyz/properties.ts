/**
 * The Properties= value of extended XYZ: "name:T:n" triplets (T one of S, R, I, L; n columns),
 * e.g. species:S:1:pos:R:3:forces:R:3. The sum of the counts is the number of columns per atom line.
 */
import type { ColumnType } from '../frame.js';
import { XyzError, shown } from './errors.js';

export interface PropertyDef {
  name: string;
  type: ColumnType;
  width: number;
  /** 0-based index of its first column on an atom line. */
  first: number;
}

export interface Layout {
  /** The Properties text, for messages. */
  text: string;
  props: PropertyDef[];
  /** Columns per atom line. */
  ncols: number;
  /** Index in props of species (S:1), pos (R:3) and Z (I:1); -1 when absent. */
  species: number;
  pos: number;
  z: number;
  /** Plain XYZ (no Properties): species x y z, further columns ignored. */
  plain: boolean;
}

/** Plain XYZ and extended XYZ without Properties: species and positions. */
export const PLAIN_LAYOUT: Layout = {
  text: 'species:S:1:pos:R:3',
  props: [
    { name: 'species', type: 'S', width: 1, first: 0 },
    { name: 'pos', type: 'R', width: 3, first: 1 },
  ],
  ncols: 4,
  species: 0,
  pos: 1,
  z: -1,
  plain: true,
};

const cache = new Map<string, Layout>();

/** Parse a Properties value; errors name the comment line (`line`). Results are cached by text. */
export function parseProperties(text: string, file: string, line: number): Layout {
  const hit = cache.get(text);
  if (hit) return hit;
  const fail = (detail: string): never => {
    throw new XyzError(file, line, `Properties: ${detail}`);
  };
  const fields = text.split(':');
  if (text === '' || fields.length % 3 !== 0) {
    fail(`expected name:type:count triplets (type S, R, I or L; count a positive integer), found ${fields.length} fields in ${shown(text)}`);
  }
  const props: PropertyDef[] = [];
  const names = new Set<string>();
  let first = 0;
  for (let k = 0; k < fields.length; k += 3) {
    const [name, type, count] = [fields[k], fields[k + 1], fields[k + 2]];
    if (name === '') fail(`entry ${k / 3 + 1} has an empty name, in ${shown(text)}`);
    if (type !== 'S' && type !== 'R' && type !== 'I' && type !== 'L') {
      fail(`column '${name}' has type ${shown(type)}, expected one of S, R, I, L`);
    }
    if (!/^[1-9][0-9]*$/.test(count) || Number(count) > 1_000_000) {
      fail(`column '${name}' has count ${shown(count)}, expected a positive integer`);
    }
    if (names.has(name)) fail(`column '${name}' appears more than once`);
    names.add(name);
    const width = Number(count);
    props.push({ name, type: type as ColumnType, width, first });
    first += width;
  }
  const idx = (name: string) => props.findIndex((p) => p.name === name);
  const species = idx('species');
  const pos = idx('pos');
  const z = idx('Z');
  if (pos < 0) fail(`no pos:R:3 column (positions are required), found ${shown(text)}`);
  if (props[pos].type !== 'R' || props[pos].width !== 3) {
    fail(`expected pos:R:3 (positions), found pos:${props[pos].type}:${props[pos].width}`);
  }
  if (species >= 0 && (props[species].type !== 'S' || props[species].width !== 1)) {
    fail(`expected species:S:1 (element symbols), found species:${props[species].type}:${props[species].width}`);
  }
  if (species < 0) {
    if (z < 0) fail(`no species:S:1 column and no Z:I:1 column to take the elements from, found ${shown(text)}`);
    if (props[z].type !== 'I' || props[z].width !== 1) {
      fail(`expected Z:I:1 (atomic numbers) when there is no species column, found Z:${props[z].type}:${props[z].width}`);
    }
  }
  const layout: Layout = { text, props, ncols: first, species, pos, z: z >= 0 && props[z].type === 'I' && props[z].width === 1 ? z : -1, plain: false };
  if (cache.size > 256) cache.clear();
  cache.set(text, layout);
  return layout;
}
