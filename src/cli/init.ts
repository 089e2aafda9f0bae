import type { Command } from 'commander';

// Placeholder until the 'init' command lands.
export function register(_program: Command): void {}
