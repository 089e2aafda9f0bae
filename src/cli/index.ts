#!/usr/bin/env node
/**
 * Entry point of the `ratchet` command. Before the command line itself loads, a `check` of big files starts its
 * worker threads (prestart.ts), so that their start-up overlaps the loading of the program.
 */
import { prestart } from './prestart.js';

prestart(process.argv.slice(2));
await import('./main.js');
