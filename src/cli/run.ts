import type { Command } from 'commander';

// Placeholder until the 'run' command lands.
export function register(_program: Command): void {}
