/** Where tasks run: the backend interface, the local backend, batch-script rendering, exit records. */
export type { Backend, TaskSpec, TaskState, TaskStatus, Submission, Resources, ExitRecord } from './backend.js';
export { renderScript, baseEnv, RenderError } from './render.js';
export { shellQuote, sanitizeJobName, toEnvName, isEnvName, ShellValueError } from './shell.js';
export { loadTemplates, compileTemplate, clearTemplateCache, TemplateError, PLACEHOLDERS, BUILTIN_TEMPLATES_DIR, type ScriptTemplates } from './templates.js';
export { readExitRecord, readExitRecordSync, parseExitRecord, elapsedSeconds, tailLines, EXIT_RECORD_FILE, STDOUT_FILE, STDERR_FILE } from './exit-record.js';
export { writeTaskFiles, writeTaskFilesSync, archiveAttempt, TaskFinishedError, SCRIPT_FILE, TASK_FILE, LOCAL_PID_FILE, ATTEMPTS_DIR } from './task-files.js';
export { LocalBackend, BackendOptionError, livePid, hms, type LocalBackendOptions } from './local.js';
export { getBackend, registerBackend, backendNames, UnknownBackendError, type BackendOptions, type BackendFactory } from './registry.js';
