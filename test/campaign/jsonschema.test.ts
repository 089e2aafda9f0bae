/**
 * The emitted JSON Schema. It is checked as an editor would use it: a small validator written here,
 * independently of zod, following the JSON Schema 2020-12 validation vocabulary (json-schema.org,
 * "JSON Schema Validation: A Vocabulary for Structural Validation of JSON", draft 2020-12, sections 6.1-6.5,
 * and "JSON Schema Core" 2020-12 section 10 for properties / additionalProperties / items / anyOf / propertyNames),
 * validates the starter campaign and rejects malformed ones.
 */
import { describe, expect, it } from 'vitest';
import { parse } from 'yaml';
import { campaignJsonSchema } from '../../src/campaign/jsonschema.js';
import { STARTER_CAMPAIGN } from '../../src/campaign/starter.js';

type Schema = Record<string, any>;

/** Keywords of the 2020-12 core, applicator, validation and meta-data vocabularies. */
const KNOWN = new Set([
  '$schema', '$id', '$ref', '$defs', '$comment', '$anchor', '$dynamicRef', '$dynamicAnchor', '$vocabulary',
  'allOf', 'anyOf', 'oneOf', 'not', 'if', 'then', 'else', 'dependentSchemas', 'prefixItems', 'items', 'contains',
  'properties', 'patternProperties', 'additionalProperties', 'propertyNames', 'unevaluatedItems', 'unevaluatedProperties',
  'type', 'enum', 'const', 'multipleOf', 'maximum', 'exclusiveMaximum', 'minimum', 'exclusiveMinimum', 'maxLength', 'minLength',
  'pattern', 'maxItems', 'minItems', 'uniqueItems', 'maxContains', 'minContains', 'maxProperties', 'minProperties', 'required',
  'dependentRequired', 'format', 'title', 'description', 'default', 'deprecated', 'readOnly', 'writeOnly', 'examples',
]);

function typeOf(v: unknown): string[] {
  if (v === null) return ['null'];
  if (Array.isArray(v)) return ['array'];
  if (typeof v === 'number') return Number.isInteger(v) ? ['number', 'integer'] : ['number'];
  return [typeof v];
}

/** Errors of `value` against `schema`, as "path: keyword" strings. Covers the keywords the emitted schema uses. */
function validate(schema: Schema, value: unknown, path = ''): string[] {
  const errs: string[] = [];
  const fail = (kw: string) => errs.push(`${path || '/'}: ${kw}`);
  for (const kw of Object.keys(schema)) if (!KNOWN.has(kw)) fail(`unsupported keyword ${kw}`);
  if (schema.type !== undefined) {
    const wanted: string[] = Array.isArray(schema.type) ? schema.type : [schema.type];
    if (!typeOf(value).some((t) => wanted.includes(t))) return [`${path || '/'}: type`];
  }
  if (schema.enum && !schema.enum.some((e: unknown) => e === value)) fail('enum');
  if (typeof value === 'number') {
    if (schema.minimum !== undefined && !(value >= schema.minimum)) fail('minimum');
    if (schema.maximum !== undefined && !(value <= schema.maximum)) fail('maximum');
    if (schema.exclusiveMinimum !== undefined && !(value > schema.exclusiveMinimum)) fail('exclusiveMinimum');
    if (schema.exclusiveMaximum !== undefined && !(value < schema.exclusiveMaximum)) fail('exclusiveMaximum');
  }
  if (typeof value === 'string') {
    if (schema.minLength !== undefined && [...value].length < schema.minLength) fail('minLength');
    if (schema.pattern !== undefined && !new RegExp(schema.pattern, 'u').test(value)) fail('pattern');
  }
  if (Array.isArray(value)) {
    if (schema.minItems !== undefined && value.length < schema.minItems) fail('minItems');
    if (schema.items) value.forEach((v, i) => errs.push(...validate(schema.items, v, `${path}/${i}`)));
  }
  if (value !== null && typeof value === 'object' && !Array.isArray(value)) {
    const obj = value as Record<string, unknown>;
    for (const r of schema.required ?? []) if (!(r in obj)) fail(`required ${r}`);
    for (const [k, v] of Object.entries(obj)) {
      if (schema.propertyNames) errs.push(...validate(schema.propertyNames, k, `${path}/${k} (name)`));
      if (schema.properties && k in schema.properties) errs.push(...validate(schema.properties[k], v, `${path}/${k}`));
      else if (schema.additionalProperties === false) fail(`additionalProperties ${k}`);
      else if (typeof schema.additionalProperties === 'object') errs.push(...validate(schema.additionalProperties, v, `${path}/${k}`));
    }
  }
  if (schema.anyOf && !schema.anyOf.some((s: Schema) => validate(s, value, path).length === 0)) fail('anyOf');
  return errs;
}

const schema = campaignJsonSchema();

describe('campaign JSON Schema', () => {
  it('is a draft 2020-12 document of an object with fixed keys', () => {
    expect(schema.$schema).toBe('https://json-schema.org/draft/2020-12/schema');
    expect(schema.type).toBe('object');
    expect(schema.additionalProperties).toBe(false);
    expect(Object.keys(schema.properties as object)).toEqual([
      'name', 'description', 'species', 'start', 'committee', 'holdout', 'rounds', 'conditions', 'stages', 'backend', 'budget',
    ]);
    expect(schema.required).toEqual(['name', 'species', 'start', 'conditions', 'stages']);
    // Round-trips through JSON (what `ratchet schema` prints).
    expect(JSON.parse(JSON.stringify(schema))).toEqual(schema);
  });

  it('validates the starter campaign', () => {
    const doc = parse(STARTER_CAMPAIGN);
    expect(validate(schema, doc)).toEqual([]);
  });

  it('rejects what the loader rejects where JSON Schema can say it', () => {
    const good = () => parse(STARTER_CAMPAIGN);
    const cases: [string, (d: any) => void, string][] = [
      ['unknown key', (d) => (d.stages.label.frame_per_task = 3), '/stages/label: additionalProperties frame_per_task'],
      ['unknown top-level key', (d) => (d.colour = 'blue'), '/: additionalProperties colour'],
      ['wrong type', (d) => (d.committee.size = 'four'), '/committee/size: type'],
      ['missing command', (d) => delete d.stages.train.command, '/stages/train: required command'],
      ['negative walltime', (d) => (d.stages.label.resources.walltime = '-1'), '/stages/label/resources/walltime: anyOf'],
      ['walltime minutes of 60', (d) => (d.stages.label.resources.walltime = '01:60:00'), '/stages/label/resources/walltime: anyOf'],
      ['memory unit', (d) => (d.stages.label.resources.memory = '4X'), '/stages/label/resources/memory: anyOf'],
      ['committee of one', (d) => (d.committee.size = 1), '/committee/size: minimum'],
      ['backend kind', (d) => (d.backend.kind = 'slurn'), '/backend/kind: enum'],
      ['species symbol', (d) => (d.species = ['Xx']), '/species/0: enum'],
      ['condition name', (d) => (d.conditions[0].name = 'a b'), '/conditions/0/name: pattern'],
      ['pair key', (d) => (d.stages.label.contacts.min_distance = { 'Si+Si': 1 }), '/stages/label/contacts/min_distance/Si+Si (name): pattern'],
      ['holdout', (d) => (d.holdout = 1), '/holdout: exclusiveMaximum'],
    ];
    for (const [what, change, expected] of cases) {
      const d = good();
      change(d);
      expect(validate(schema, d), what).toEqual([expected]);
    }
  });

  it('accepts the other forms the loader accepts', () => {
    const d = parse(STARTER_CAMPAIGN);
    d.start = ['a.xyz', 'b.xyz'];
    d.stages.label.resources.walltime = '1-12:00:00';
    d.stages.train.resources.walltime = 7200;
    d.stages.label.resources.memory = 2048;
    d.stages.train.setup = 'module load x\nsource y';
    d.conditions[1].start = 'hot.xyz';
    d.conditions[1].pressure = 10000;
    d.budget = null; // a section left empty
    d.backend = { kind: 'slurm', array_throttle: 20, walltime_max: '2-00:00:00', memory_max: '64G' };
    expect(validate(schema, d)).toEqual([]);
  });

  it('describes its keys for editors', () => {
    const label = (schema.properties as any).stages.properties.label.properties;
    expect(label.frames_per_task.description).toMatch(/Frames labeled by one task/);
    expect(label.frames_per_task.default).toBe(20);
    expect(label.resources.properties.walltime.default).toBe('01:00:00');
  });
});
