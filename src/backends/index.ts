/** Where tasks run: the backend interface, the local backend, batch-script rendering, exit records. */
export type { Backend, TaskSpec, TaskState, TaskStatus, Submission, Resources, ExitRecord } from './backend.js';
export { renderScript, baseEnv, RenderError } from './render.js';
export { shellQuote, sanitizeJobName, toEnvName, isEnvName, ShellValueError } from './shell.js';
export { loadTemplates, compileTemplate, clearTemplateCache, TemplateError, PLACEHOLDERS, BUILTIN_TEMPLATES_DIR, type ScriptTemplates } from './templates.js';
export { readExitRecord, readExitRecordSync, parseExitRecord, elapsedSeconds, tailLines, EXIT_RECORD_FILE, STDOUT_FILE, STDERR_FILE } from './exit-record.js';
export { writeTaskFiles, writeTaskFilesSync, archiveAttempt, TaskFinishedError, SCRIPT_FILE, TASK_FILE, LOCAL_PID_FILE, ATTEMPTS_DIR } from './task-files.js';
export { LocalBackend, BackendOptionError, livePid, hms, type LocalBackendOptions } from './local.js';
export { getBackend, registerBackend, backendNames, UnknownBackendError, type BackendOptions, type BackendFactory } from './registry.js';
// Cluster backends (Slurm, PBS, LSF, Grid Engine) and their shared helpers.
export { ClusterBackend, type ClusterBackendOptions, type Dialect, type SchedJob, type Mapped } from './cluster.js';
export { SlurmBackend, SlurmDialect } from './slurm.js';
export { PbsBackend, PbsDialect } from './pbs.js';
export { LsfBackend, LsfDialect } from './lsf.js';
export { SgeBackend, SgeDialect } from './sge.js';
export { planUnits, writeArrayFiles, manifestText, arrayScript, ARRAYS_DIR, type SubmissionUnit } from './arrays.js';
export { DIRECTIVES, DirectiveError, type SchedulerName, type ArrayRequest } from './directives.js';
export { decide, classifyCommandFailure, backoffMs, describeExitCode, FAILURE_CLASSES, type Decision, type RetryPolicy, type AttemptHistory, type FailureClass } from './classify.js';
export { SchedulerCli, SchedulerCommandError, type CommandRunner, type CommandSpec } from './scheduler-cli.js';
export { preflight, problemsByStage, bashSyntax, type PreflightReport, type PreflightProblem } from './preflight.js';
export { estimateCoreHours, estimateTasksCoreHours, checkBudget, attemptCoreHours, summarizeUsage, type Budget, type BudgetCheck, type AttemptUsage, type UsageSummary } from './budget.js';
export { clusterOptions } from './registry.js';
