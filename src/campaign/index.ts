/** The campaign file: schema and types, loading with line-aware errors, JSON Schema, starter. */
export * from './schema.js';
export { parseWalltime, parseMemory, formatWalltime, formatMemory } from './units.js';
export {
  loadCampaign,
  parseCampaignText,
  CampaignError,
  formatProblem,
  formatKeyPath,
  startPaths,
  conditionStartPath,
  type CampaignProblem,
  type LoadedCampaign,
  type LoadOptions,
  type KeyPath,
} from './load.js';
export { campaignJsonSchema, type JsonSchema } from './jsonschema.js';
export { nearest } from './suggest.js';
export { writeStarter, starterStructure, STARTER_CAMPAIGN, STARTER_CAMPAIGN_FILE, STARTER_STRUCTURE_FILE, InitError } from './starter.js';
