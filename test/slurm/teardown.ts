/** Vitest global teardown: stops the test Slurm cluster once every test file has finished (test/slurm/cluster.ts). */
import { stopIfStartedByTests } from './cluster.js';

export function teardown(): void {
  stopIfStartedByTests();
}
