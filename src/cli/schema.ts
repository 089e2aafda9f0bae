import type { Command } from 'commander';

// Placeholder until the 'schema' command lands.
export function register(_program: Command): void {}
