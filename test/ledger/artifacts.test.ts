/**
 * Artifact hashing. File hashes are checked against the NIST FIPS 180-2 example vectors (Appendix B)
 * and against GNU coreutils `sha256sum`, run in a child process (independent of our code). The
 * directory hash is recomputed from its documented manifest format with shell tools (find, sort,
 * sha256sum) and checked for stability under file creation order.
 */
import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { chmodSync, mkdirSync, mkdtempSync, symlinkSync, utimesSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { randomBytes } from 'node:crypto';
import {
  artifactEvent,
  campaignRelative,
  hashArtifact,
  indexArtifacts,
  isArtifactId,
  type LedgerEvent,
} from '../../src/ledger/index.js';
import { VERSION } from '../../src/version.js';

function tmp(): string {
  return mkdtempSync(join(tmpdir(), 'ratchet-art-'));
}

function sha256sum(path: string): string {
  return execFileSync('sha256sum', ['-b', path], { encoding: 'utf8' }).split(' ')[0];
}

describe('hashArtifact: files', () => {
  it('matches the FIPS 180-2 example vectors', async () => {
    const d = tmp();
    // NIST FIPS 180-2 (2002), Appendix B.1 ("abc") and B.2 (the 448-bit message).
    writeFileSync(join(d, 'abc'), 'abc');
    writeFileSync(join(d, 'b2'), 'abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq');
    expect((await hashArtifact(join(d, 'abc'))).sha256).toBe('ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad');
    expect((await hashArtifact(join(d, 'b2'))).sha256).toBe('248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1');
  });

  it('matches coreutils sha256sum for empty, small and multi-chunk files', async () => {
    const d = tmp();
    const sizes = [0, 1, 63, 64, 65, (1 << 20) - 1, 1 << 20, (1 << 20) + 1, 3 * (1 << 20) + 12345];
    for (const n of sizes) {
      const p = join(d, `f${n}`);
      writeFileSync(p, randomBytes(n));
      const h = await hashArtifact(p);
      expect(h).toEqual({ sha256: sha256sum(p), bytes: n, kind: 'file' });
    }
  });
});

/** The directory hash rebuilt from its documented manifest with shell tools only. */
function shellDirHash(root: string): string {
  const script = `
    set -eu
    cd "$1"
    {
      printf 'ratchet-dir-v1\\n'
      find . -mindepth 1 \\( -type f -o -type l \\) -printf '%P\\n' | LC_ALL=C sort | while IFS= read -r p; do
        if [ -L "$p" ]; then
          printf 'l %s - %s\\n' "$(printf '%s' "$(readlink "$p")" | sha256sum | cut -d' ' -f1)" "$p"
        else
          x=-; if [ "$(( 0$(stat -c %a "$p") & 0100 ))" -ne 0 ]; then x=x; fi
          printf 'f %s %s %s\\n' "$(sha256sum -b "$p" | cut -d' ' -f1)" "$x" "$p"
        fi
      done
    } | sha256sum | cut -d' ' -f1
  `;
  return execFileSync('bash', ['-c', script, 'dirhash', root], { encoding: 'utf8' }).trim();
}

const FILES: Record<string, string> = {
  'model.json': '{"w":[1,2,3]}',
  'sub/a.txt': 'alpha',
  'sub/B.txt': 'beta',
  'sub/deeper/z.bin': '\u0000\u0001\u0002',
  'run.sh': '#!/bin/sh\necho hi\n',
  'ünïcode name.txt': 'ü',
};

function populate(root: string, order: string[]): void {
  for (const name of order) {
    const p = join(root, name);
    mkdirSync(join(p, '..'), { recursive: true });
    writeFileSync(p, FILES[name]);
  }
  chmodSync(join(root, 'run.sh'), 0o755);
}

describe('hashArtifact: directories', () => {
  const names = ['model.json', 'sub/a.txt', 'sub/B.txt', 'sub/deeper/z.bin', 'run.sh', 'ünïcode name.txt'];

  it('equals the documented manifest hash computed with find/sort/sha256sum', async () => {
    const d = tmp();
    populate(d, names);
    symlinkSync('model.json', join(d, 'link-to-model'));
    const h = await hashArtifact(d);
    expect(h.kind).toBe('dir');
    expect(h.sha256).toBe(shellDirHash(d));
    expect(h.bytes).toBe(names.reduce((s, n) => s + Buffer.byteLength(FILES[n]), 0));
  });

  it('does not depend on creation order, timestamps or empty directories', async () => {
    const a = tmp();
    const b = tmp();
    populate(a, names);
    populate(b, [...names].reverse());
    mkdirSync(join(b, 'empty/also-empty'), { recursive: true });
    utimesSync(join(b, 'model.json'), new Date(0), new Date(0));
    expect((await hashArtifact(a)).sha256).toBe((await hashArtifact(b)).sha256);
  });

  it('changes with content, names and the executable bit', async () => {
    const base = tmp();
    populate(base, names);
    const h0 = (await hashArtifact(base)).sha256;

    const c = tmp();
    populate(c, names);
    writeFileSync(join(c, 'sub/a.txt'), 'alphA');
    expect((await hashArtifact(c)).sha256).not.toBe(h0);

    const n = tmp();
    populate(n, names);
    writeFileSync(join(n, 'sub/c.txt'), '');
    expect((await hashArtifact(n)).sha256).not.toBe(h0);

    const x = tmp();
    populate(x, names);
    chmodSync(join(x, 'run.sh'), 0o644);
    expect((await hashArtifact(x)).sha256).not.toBe(h0);
  });

  it('can leave out entries (e.g. logs) through ignore', async () => {
    const a = tmp();
    populate(a, names);
    const h0 = (await hashArtifact(a)).sha256;
    writeFileSync(join(a, 'stdout.log'), 'noise');
    expect((await hashArtifact(a, { ignore: (p) => p.endsWith('.log') })).sha256).toBe(h0);
  });
});

describe('artifact events and index', () => {
  it('builds the artifact event of the brief, with a campaign-relative path', async () => {
    const c = tmp();
    mkdirSync(join(c, 'rounds/0/label/0000'), { recursive: true });
    const p = join(c, 'rounds/0/label/0000/labeled.xyz');
    writeFileSync(p, '1\n\nAr 0 0 0\n');
    const inp = 'sha256:' + 'a'.repeat(64);
    const e = await artifactEvent({
      campaignDir: c,
      path: p,
      role: 'labeled',
      task: 'r0/label/0000',
      inputs: [inp],
      command: 'label.sh',
      campaign_sha256: 'f'.repeat(64),
    });
    expect(e).toEqual({
      type: 'artifact',
      id: 'sha256:' + sha256sum(p),
      path: 'rounds/0/label/0000/labeled.xyz',
      role: 'labeled',
      task: 'r0/label/0000',
      inputs: [inp],
      command: 'label.sh',
      campaign_sha256: 'f'.repeat(64),
      tool_version: VERSION,
      kind: 'file',
      bytes: 12, // '1\n\nAr 0 0 0\n'
    });
    expect(isArtifactId(e.id)).toBe(true);
    await expect(artifactEvent({ campaignDir: c, path: p, role: 'x', inputs: ['abc'], campaign_sha256: '' })).rejects.toThrow(
      /input "abc" is not an artifact id/,
    );
    expect(() => campaignRelative(c, join(c, '..', 'elsewhere.xyz'))).toThrow(/inside the campaign directory/);
  });

  it('indexes by id (first registration), path (latest), task and consumers', () => {
    const id = (ch: string): string => 'sha256:' + ch.repeat(64);
    const ev = (seq: number, f: Record<string, unknown>): LedgerEvent => ({ seq, at: '2024-01-01T00:00:00.000Z', type: 'artifact', inputs: [], campaign_sha256: 'c', tool_version: '0', ...f });
    const events: LedgerEvent[] = [
      ev(1, { id: id('1'), path: 'start.xyz', role: 'start' }),
      { seq: 2, at: '2024-01-01T00:00:00.000Z', type: 'task', task: 'r0/label/0000', state: 'succeeded' },
      ev(3, { id: id('2'), path: 'rounds/0/label/0000/out.xyz', role: 'labeled', task: 'r0/label/0000', inputs: [id('1')] }),
      ev(4, { id: id('3'), path: 'rounds/0/label/0000/out.xyz', role: 'labeled', task: 'r0/label/0000', inputs: [id('1'), id('1')] }),
      ev(5, { id: id('2'), path: 'copy.xyz', role: 'labeled', task: 'r0/label/0001', inputs: [id('1')] }),
    ];
    const ix = indexArtifacts(events);
    expect(ix.byId.get(id('2'))!.seq).toBe(3);
    expect(ix.registrations.get(id('2'))!.map((e) => e.seq)).toEqual([3, 5]);
    expect(ix.byPath.get('rounds/0/label/0000/out.xyz')!.id).toBe(id('3'));
    expect(ix.byTask.get('r0/label/0000')!.map((e) => e.seq)).toEqual([3, 4]);
    expect(ix.consumers.get(id('1'))!.map((e) => e.seq)).toEqual([3, 4, 5]);
  });
});
