/**
 * Backends by name. `local` is built in; cluster backends (slurm, pbs, lsf, sge) register here the
 * same way when they land, and the CLI's --backend and the campaign's `backend` go through getBackend.
 */
import { closest } from 'fastest-levenshtein';
import type { Backend } from './backend.js';
import { LocalBackend } from './local.js';
import type { ClusterBackendOptions } from './cluster.js';
import { SlurmBackend } from './slurm.js';
import { PbsBackend } from './pbs.js';
import { LsfBackend } from './lsf.js';
import { SgeBackend } from './sge.js';

/** Options every factory receives; each backend reads the ones it knows. */
export interface BackendOptions {
  /** Tasks at once (local: processes; cluster: the array throttle). */
  jobs?: number;
  /** Absolute path of the campaign's own template folder, when it has one. */
  templatesDir?: string;
  [option: string]: unknown;
}

export type BackendFactory = (options: BackendOptions) => Backend;

/** An unknown backend name: exit code 2, lists the known ones. */
export class UnknownBackendError extends Error {
  readonly exitCode = 2;
  constructor(
    readonly backend: string,
    readonly known: string[],
  ) {
    const near = known.length ? closest(backend, known) : undefined;
    super(`unknown backend ${JSON.stringify(backend)}: expected one of ${known.join(', ')}${near && near !== backend ? ` (did you mean ${JSON.stringify(near)}?)` : ''}`);
    this.name = 'UnknownBackendError';
  }
}

const factories = new Map<string, BackendFactory>();

/** Add (or replace) a backend. */
export function registerBackend(name: string, factory: BackendFactory): void {
  factories.set(name, factory);
}

/** The names getBackend knows, sorted. */
export function backendNames(): string[] {
  return [...factories.keys()].sort();
}

/** A new backend instance by name; unknown names throw UnknownBackendError. */
export function getBackend(name: string, options: BackendOptions = {}): Backend {
  const factory = factories.get(name);
  if (!factory) throw new UnknownBackendError(name, backendNames());
  return factory(options);
}

registerBackend('local', (o) => new LocalBackend({ jobs: o.jobs, templatesDir: o.templatesDir, killGraceMs: o.killGraceMs as number | undefined, enforceWalltime: o.enforceWalltime as boolean | undefined }));

/**
 * Cluster backend options from BackendOptions: the campaign's `backend` keys as written in the file
 * (max_array_size, array_throttle, poll_interval, submit_retries, submit_timeout) or their camelCase
 * forms; `jobs` is the array throttle when array_throttle is not given.
 */
export function clusterOptions(o: BackendOptions): ClusterBackendOptions {
  const num = (...keys: string[]): number | undefined => {
    for (const k of keys) if (typeof o[k] === 'number') return o[k] as number;
    return undefined;
  };
  return {
    templatesDir: o.templatesDir,
    maxArraySize: num('max_array_size', 'maxArraySize'),
    arrayThrottle: num('array_throttle', 'arrayThrottle', 'jobs'),
    pollIntervalS: num('poll_interval', 'pollIntervalS'),
    submitRetries: num('submit_retries', 'submitRetries'),
    submitTimeoutS: num('submit_timeout', 'submitTimeoutS'),
    exitGraceS: num('exit_grace', 'exitGraceS'),
    ...(typeof o.user === 'string' ? { user: o.user } : {}),
  };
}

registerBackend('slurm', (o) => new SlurmBackend({ ...clusterOptions(o), ...(typeof o.jobcompFile === 'string' ? { jobcompFile: o.jobcompFile } : {}) }));
registerBackend('pbs', (o) => new PbsBackend(clusterOptions(o)));
registerBackend('lsf', (o) => new LsfBackend(clusterOptions(o)));
registerBackend('sge', (o) => new SgeBackend({ ...clusterOptions(o), ...(typeof o.sge_pe === 'string' ? { pe: o.sge_pe } : {}) }));
