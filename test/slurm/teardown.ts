/**
 * Vitest global setup and teardown: gives this test run an id (inherited by the test processes), and stops the test
 * Slurm cluster once every test file has finished, if a test of this run started it (test/slurm/cluster.ts).
 */
import { randomUUID } from 'node:crypto';
import { stopIfStartedByTests } from './cluster.js';

export function setup(): void {
  process.env.RATCHET_TEST_RUN = `vitest-${process.pid}-${randomUUID()}`;
}

export function teardown(): void {
  stopIfStartedByTests();
}
