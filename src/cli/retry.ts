import type { Command } from 'commander';

// Placeholder until the 'retry' command lands.
export function register(_program: Command): void {}
