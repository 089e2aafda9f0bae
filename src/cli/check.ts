import type { Command } from 'commander';

// Placeholder until the 'check' command lands.
export function register(_program: Command): void {}
