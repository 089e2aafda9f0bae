/**
 * Parsers for the resource quantities a campaign file writes as text: walltimes and memory sizes.
 * Pure functions; undefined means "not a valid value" so callers can word their own error.
 */

/**
 * A walltime in seconds from "HH:MM:SS", "D-HH:MM:SS" or a whole number of seconds.
 * Hours may exceed 23 in the "HH:MM:SS" form ("48:00:00"); minutes and seconds must be below 60.
 * Zero and negative durations are rejected (undefined).
 * The string forms are the ones Slurm documents for --time ("hours:minutes:seconds",
 * "days-hours:minutes:seconds"); the other schedulers accept HH:MM:SS as well.
 */
export function parseWalltime(value: string | number): number | undefined {
  if (typeof value === 'number') {
    return Number.isSafeInteger(value) && value > 0 ? value : undefined;
  }
  const m = /^\s*(?:(\d+)-)?(\d+):(\d{2}):(\d{2})\s*$/.exec(value);
  if (!m) {
    // A bare whole number written as a string ("3600") is seconds too.
    if (/^\s*\d+\s*$/.test(value)) return parseWalltime(Number(value));
    return undefined;
  }
  const days = m[1] === undefined ? 0 : Number(m[1]);
  const hours = Number(m[2]);
  const minutes = Number(m[3]);
  const seconds = Number(m[4]);
  if (minutes >= 60 || seconds >= 60) return undefined;
  // In the "D-HH:MM:SS" form the hours are the hours of the last day.
  if (m[1] !== undefined && hours >= 24) return undefined;
  const total = ((days * 24 + hours) * 60 + minutes) * 60 + seconds;
  return total > 0 && Number.isSafeInteger(total) ? total : undefined;
}

/** Seconds as "HH:MM:SS" (hours unbounded), or "D-HH:MM:SS" when `days` is set and the time is a day or more. */
export function formatWalltime(totalSeconds: number, opts: { days?: boolean } = {}): string {
  const s = Math.max(0, Math.ceil(totalSeconds));
  const two = (n: number) => String(n).padStart(2, '0');
  const hh = Math.floor(s / 3600);
  const mm = Math.floor((s % 3600) / 60);
  const ss = s % 60;
  if (opts.days && hh >= 24) return `${Math.floor(hh / 24)}-${two(hh % 24)}:${two(mm)}:${two(ss)}`;
  return `${two(hh)}:${two(mm)}:${two(ss)}`;
}

const MEMORY_UNIT_MIB: Record<string, number> = { K: 1 / 1024, M: 1, G: 1024, T: 1024 * 1024 };

/**
 * A memory size in MiB from "500M", "4G", "1.5G", "2T", "512K" (optionally followed by "B" or "iB",
 * any letter case) or a plain number (MiB). Units are binary (1G = 1024 MiB), as the schedulers read them.
 * Fractions of a MiB are rounded up. Zero and negative sizes are rejected (undefined).
 */
export function parseMemory(value: string | number): number | undefined {
  if (typeof value === 'number') {
    return Number.isFinite(value) && value > 0 ? Math.ceil(value) : undefined;
  }
  const m = /^\s*(\d+(?:\.\d+)?)\s*([kmgtKMGT])(?:i?[bB])?\s*$/.exec(value) ?? /^\s*(\d+(?:\.\d+)?)\s*$/.exec(value);
  if (!m) return undefined;
  const amount = Number(m[1]);
  const unit = m[2] === undefined ? 'M' : m[2].toUpperCase();
  const mib = Math.ceil(amount * MEMORY_UNIT_MIB[unit]! - 1e-9);
  return Number.isSafeInteger(mib) && mib > 0 ? mib : undefined;
}

/** MiB as the shortest exact "NG" or "NM" string. */
export function formatMemory(mib: number): string {
  return mib % 1024 === 0 ? `${mib / 1024}G` : `${mib}M`;
}
