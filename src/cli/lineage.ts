import type { Command } from 'commander';

// Placeholder until the 'lineage' command lands.
export function register(_program: Command): void {}
