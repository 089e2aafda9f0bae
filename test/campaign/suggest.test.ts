/**
 * Nearest valid key for a typo. The distance is Levenshtein's (V. I. Levenshtein, "Binary codes capable of
 * correcting deletions, insertions, and reversals", Soviet Physics Doklady 10 (1966) 707); the worked example
 * kitten -> sitting = 3 edits is the textbook one and anchors the threshold cases below.
 */
import { describe, expect, it } from 'vitest';
import { distance } from 'fastest-levenshtein';
import { nearest } from '../../src/campaign/suggest.js';

const LABEL_KEYS = ['command', 'resources', 'setup', 'attempts', 'params', 'frames_per_task', 'max_force', 'max_rejected_fraction', 'contacts'];

describe('nearest', () => {
  it('uses edit distance (kitten -> sitting = 3)', () => {
    expect(distance('kitten', 'sitting')).toBe(3);
    // 3 edits on a 6-letter word are more than the allowed 2: no suggestion.
    expect(nearest('kitten', ['sitting'])).toBeUndefined();
    // A swap of two letters is 2 edits; on a 6-letter word that is allowed.
    expect(distance('memroy', 'memory')).toBe(2);
    expect(nearest('memroy', ['memory', 'walltime'])).toBe('memory');
    // On a 5-letter word only 1 edit is.
    expect(nearest('gpsu', ['gpus'])).toBeUndefined();
  });

  it.each([
    ['frame_per_task', 'frames_per_task'], // one deletion
    ['frames-per-task', 'frames_per_task'], // separators read as "_"
    ['Frames_Per_Task', 'frames_per_task'], // case ignored
    ['comand', 'command'],
    ['atempts', 'attempts'],
    ['resource', 'resources'],
    ['max_forces', 'max_force'],
  ])('%s -> %s', (typo, key) => {
    expect(nearest(typo, LABEL_KEYS)).toBe(key);
  });

  it('offers nothing for a word far from every key', () => {
    expect(nearest('colour', LABEL_KEYS)).toBeUndefined();
    expect(nearest('x', LABEL_KEYS)).toBeUndefined();
    expect(nearest('', LABEL_KEYS)).toBeUndefined();
  });

  it('finds enum values too', () => {
    expect(nearest('slurn', ['local', 'slurm', 'pbs', 'lsf', 'sge'])).toBe('slurm');
    expect(nearest('SLURM', ['local', 'slurm', 'pbs', 'lsf', 'sge'])).toBe('slurm');
  });
});
