// The demo uses ratchet's own seeded generator (one implementation for the tool and its examples).
export { createRandom, type Random } from '../../../src/select/random.js';
