/**
 * The physical gates: pure per-frame functions, their summaries, and one high-level check per gate.
 * Every check returns a GateResult { gate, verdict, reasons, figures } and throws GateInputError (or the reader's
 * XyzError / ThermoError) for input it cannot judge.
 */
export type { Verdict, GateResult, FileSpan } from './types.js';
export { GateInputError } from './types.js';
export { worst, Judgement } from './verdict.js';
export {
  checkContacts,
  contactsFrame,
  summarizeContacts,
  pairKey,
  pairLimitsFor,
  normalisePairLimits,
  CONTACTS_DEFAULTS,
  type ContactsOptions,
  type ContactsFrameOptions,
  type ContactsSample,
  type ContactsFigures,
  type ContactViolation,
} from './contacts.js';
export {
  checkDrift,
  driftFrame,
  summarizeDrift,
  summarizeThermo,
  seriesFigures,
  defaultDof,
  defaultDofRule,
  UNPHYSICAL_TEMPERATURE_K,
  looksLikeTable,
  DRIFT_DEFAULTS,
  type DriftOptions,
  type DriftFrameOptions,
  type DriftSample,
  type DriftFigures,
} from './drift.js';
export {
  checkErrors,
  errorsFrame,
  summarizeErrors,
  ERRORS_DEFAULTS,
  type ErrorsOptions,
  type ErrorsFrameOptions,
  type ErrorsSample,
  type ErrorsFigures,
} from './errors.js';
export {
  checkCommittee,
  committeeFrame,
  summarizeCommittee,
  atomSpreads,
  bandOf,
  countModels,
  COMMITTEE_DEFAULTS,
  type Band,
  type CommitteeOptions,
  type CommitteeFrameOptions,
  type CommitteeSample,
  type CommitteeFigures,
} from './committee.js';
export {
  LIMITS,
  SAMPLE_LIMITS,
  ERRORS_LIMIT_NAMES,
  DRIFT_LIMIT_NAMES,
  resolveLimit,
  resolveLimits,
  defaultLimits,
  type Limit,
  type LimitInput,
  type LimitName,
  type ErrorsLimits,
  type DriftLimits,
} from './limits.js';
export { readThermoTable, ThermoError, type ThermoTable } from './thermo.js';
export { frameLabel, defaultWorkers } from './frames.js';
export { formatResult, resultJson } from './format.js';
export { reportCheck, inputErrorMessage } from './run.js';
