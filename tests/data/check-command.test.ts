// The `check` command end to end, run as the user runs it (tsx src/cli/main.ts check ...).
import { execFile } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, readdirSync, truncateSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, describe, expect, it } from 'vitest';
import { rmSync } from 'node:fs';
import { parseDataset } from '../../src/data/load.js';

const run = promisify(execFile);
const root = join(import.meta.dirname, '../..');
const tsx = join(root, 'node_modules/.bin/tsx');
const dir = mkdtempSync(join(tmpdir(), 'spanwright-check-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

async function check(...args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  try {
    const { stdout, stderr } = await run(tsx, ['src/cli/main.ts', 'check', ...args], { cwd: root });
    return { code: 0, stdout, stderr };
  } catch (err) {
    const e = err as { code: number; stdout: string; stderr: string };
    return { code: e.code, stdout: e.stdout, stderr: e.stderr };
  }
}

const ctx = 'The tram depot opens at six. Night trams stop at one.';
const line = (o: object): string => `${JSON.stringify(o)}\n`;
const good = line({ id: 'a', passage_id: 'depot', context: ctx, question: 'When does it open?', answers: [{ text: 'six', start: 24 }] });
const repaired = line({
  id: 'b',
  passage_id: 'depot',
  context: ctx,
  question: 'When do night trams stop?',
  answers: [{ text: 'one', start: 2 }],
});
const broken = line({ id: 'c', passage_id: 'depot', context: ctx, question: 'Where?', answers: [{ text: 'six', start: '24' }] });

describe('spanwright check', () => {
  it('exits 0 on a clean file and prints counts', async () => {
    const file = join(dir, 'clean.jsonl');
    writeFileSync(file, good + repaired);
    const r = await check(file);
    expect(r.code).toBe(0);
    expect(r.stdout).toContain('answers[0].start: warning:');
    expect(r.stdout.trimEnd().split('\n').at(-1)).toBe(
      `${file} (jsonl): 2 record(s) passed, 1 passage(s), 0 unanswerable; 0 error(s), 1 warning(s), 1 repair(s)`,
    );
  });

  it('exits 1 with errors; --json prints one object as the last line; --write-clean writes what passed', async () => {
    const file = join(dir, 'mixed.jsonl');
    const out = join(dir, 'clean.csv');
    writeFileSync(file, good + repaired + broken);
    const r = await check(file, '--json', '--write-clean', out);
    expect(r.code).toBe(1);
    const report = JSON.parse(r.stdout.trimEnd().split('\n').at(-1)!) as {
      records: number;
      errors: Array<{ record: number; id: string; field: string }>;
      warnings: Array<{ record: number }>;
    };
    expect(report.records).toBe(2);
    expect(report.errors.map((e) => [e.record, e.id, e.field])).toEqual([[2, 'c', 'answers[0].start']]);
    expect(report.warnings.map((w) => w.record)).toEqual([1]);
    expect(r.stderr).toContain('wrote 2 record(s)');
    const clean = parseDataset(readFileSync(out, 'utf8'), out);
    expect(clean.problems).toEqual([]);
    expect(clean.records.map((x) => [x.id, x.answers[0]!.start])).toEqual([
      ['a', 24],
      ['b', ctx.indexOf('one')],
    ]);
  });

  it('names a missing file, and refuses to overwrite the file being checked', async () => {
    const missing = await check(join(dir, 'nope.jsonl'));
    expect(missing.code).toBe(1);
    expect(missing.stderr).toContain('nope.jsonl: no such file');
    const file = join(dir, 'self.jsonl');
    writeFileSync(file, good);
    const self = await check(file, '--write-clean', file);
    expect(self.code).toBe(1);
    expect(self.stderr).toContain('is the file being checked');
    expect(readFileSync(file, 'utf8')).toBe(good);
  });

  it('--write-clean that cannot be written names the file and leaves no temporary file', async () => {
    const file = join(dir, 'to-clean.jsonl');
    writeFileSync(file, good);
    // a folder stands where the clean file should go: the temporary file is written, its rename fails
    const target = join(dir, 'taken.jsonl');
    mkdirSync(target);
    const r = await check(file, '--write-clean', target);
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(/--write-clean: cannot write .*taken\.jsonl \(\d+ bytes\): a folder has that name \(EISDIR\)/);
    expect(r.stderr).not.toContain('internal error');
    expect(readdirSync(dir).filter((n) => n.includes('.tmp'))).toEqual([]);
  });

  it('refuses a file too large for one string within 2× its size in memory, saying why', async () => {
    // the bound for `check` on a large file. A sparse file: 600 MB of zero bytes on
    // no disk blocks — valid UTF-8 of more characters than a V8 string holds (2^29 − 24)
    const file = join(dir, 'huge.jsonl');
    writeFileSync(file, '');
    truncateSync(file, 600_000_000);
    // the process's own peak resident size, printed as it exits (process.resourceUsage, Node ≥ 12.6)
    const probe = join(dir, 'max-rss.cjs');
    writeFileSync(probe, "process.on('exit', () => process.stderr.write(`max-rss-kib ${process.resourceUsage().maxRSS}\\n`));\n");
    let r: { code: number; stdout: string; stderr: string };
    try {
      const out = await run(process.execPath, ['--require', probe, '--import', 'tsx', 'src/cli/main.ts', 'check', file], { cwd: root });
      r = { code: 0, ...out };
    } catch (err) {
      r = err as typeof r;
    } finally {
      rmSync(file);
    }
    expect(r.code).toBe(1);
    expect(r.stdout).toContain(
      `${file}: error: the file is 600 MB of valid UTF-8, 600 million characters: more text than one JavaScript string`,
    );
    const peak = Number(/max-rss-kib (\d+)/.exec(r.stderr)?.[1]) * 1024;
    expect(peak, r.stderr).toBeGreaterThan(600_000_000); // the file was read
    expect(peak).toBeLessThan(2 * 600_000_000);
  }, 60_000);

  it('a file over 2 GiB, which Node cannot read at once, is refused in words', async () => {
    const file = join(dir, 'over-2-gib.jsonl');
    writeFileSync(file, '');
    truncateSync(file, 2_600_000_000); // sparse: no disk blocks
    try {
      const r = await check(file);
      expect(r.code).toBe(1);
      expect(r.stderr).toBe(
        `spanwright: ${file}: the file is 2.6 GB, more than Node reads into memory at once (2 GiB); split it into smaller files\n`,
      );
    } finally {
      rmSync(file);
    }
  });

  it('counts records from 1 in its lines, as the workbench does, and keeps the 0-based index in --json', async () => {
    const file = join(dir, 'third-bad.jsonl');
    writeFileSync(file, good + repaired + broken);
    const r = await check(file);
    expect(r.stdout).toContain(`${file}: record 3 (id c), answers[0].start: error:`);
    expect(r.stdout).toContain(`${file}: record 2 (id b), answers[0].start: warning:`);
    const json = await check(file, '--json');
    const report = JSON.parse(json.stdout.trimEnd().split('\n').at(-1)!) as { errors: Array<{ record: number }> };
    expect(report.errors.map((e) => e.record)).toEqual([2]);
  });

  it('a plain .txt file is no format: the error names the file and the accepted formats', async () => {
    const file = join(dir, 'notes.txt');
    writeFileSync(file, 'The tram depot opens at six.\nNight trams stop at one.\n');
    const r = await check(file);
    expect(r.code).toBe(1);
    expect(r.stdout).toContain(`${file}: error: cannot tell the format: the name ends in .txt`);
    expect(r.stdout).toContain('SQuAD 1.1/2.0 JSON (.json), JSONL (.jsonl, .ndjson), CSV (.csv) or TSV (.tsv)');
    expect(r.stdout).not.toContain('read as csv');
    // named with --format, it is read as that format
    const forced = await check(file, '--format', 'csv');
    expect(forced.stdout).toContain('the header row lacks the column(s)');
  });
});
