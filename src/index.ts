/**
 * The library entry point: `import { readFrames, checkContacts, readLedger } from 'ratchet'`.
 * The atoms core (Frame, the extended XYZ reader and writer, cells and the minimum image, neighbours,
 * elements, units), the gates (one check per gate and their pure per-frame functions), and the ledger
 * reader with its lineage queries. Everything here is also reachable by its own module path under dist/.
 */
export * from './atoms/frame.js';
export * from './atoms/xyz/index.js';
export * from './atoms/cell.js';
export * from './atoms/units.js';
export * from './atoms/elements.js';
export {
  forEachPair,
  countNeighbours,
  neighbourList,
  minimumDistance,
  minimumDistanceByGroup,
  minimumDistanceBySpecies,
  NeighbourError,
  type AtomsGeometry,
  type NeighbourOptions,
  type PairVisitor,
} from './atoms/neighbours.js';
export * from './gates/index.js';
export * from './ledger/index.js';
export { lineageQuery, findCampaignDir, LineageQueryError, renderAnswer, renderTree, type LineageRequest, type LineageAnswer } from './ledger/query.js';
export { VERSION } from './version.js';
