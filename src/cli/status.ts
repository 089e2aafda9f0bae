import type { Command } from 'commander';

// Placeholder until the 'status' command lands.
export function register(_program: Command): void {}
