import { readFileSync } from 'node:fs';

/** The tool's version, from package.json (recorded with every artifact). */
export const VERSION: string = (
  JSON.parse(readFileSync(new URL('../package.json', import.meta.url), 'utf8')) as { version: string }
).version;
