// The layering rules of eslint.config.js fail the lint when broken: code that breaks each
// rule is written for a moment into the layer it must not be in, linted, and removed.
import { rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { ESLint } from 'eslint';
import { describe, expect, it } from 'vitest';

const root = new URL('../..', import.meta.url).pathname;
const eslint = new ESLint({ cwd: root });

async function messages(code: string, filePath: string): Promise<string[]> {
  const file = join(root, filePath.replace(/\.ts$/, `-${process.pid}.lint-probe.ts`));
  writeFileSync(file, code);
  try {
    const [result] = await eslint.lintFiles([file]);
    return result!.messages.map((m) => `${m.ruleId}: ${m.message}`);
  } finally {
    rmSync(file, { force: true });
  }
}

describe('the layering rules', () => {
  it('keep Node APIs out of the core, and let the command line have them', async () => {
    const code = "import { readFileSync } from 'node:fs';\nexport const x = readFileSync;\n";
    expect((await messages(code, 'src/data/probe.ts')).join('\n')).toMatch(/no-restricted-imports: .*src\/ is isomorphic/);
    expect(await messages(code, 'src/cli/probe.ts')).toEqual([]);
  });

  it('keep tfjs and tensor code out of the page', async () => {
    const tf = "import * as tf from '@tensorflow/tfjs';\nexport const x = tf;\n";
    expect((await messages(tf, 'components/probe.ts')).join('\n')).toMatch(/the page never loads tfjs/);
    const session = "import { ReaderSession } from '../src/session/reader-session.js';\nexport const x = ReaderSession;\n";
    expect((await messages(session, 'components/probe.ts')).join('\n')).toMatch(/the page never runs tensor code/);
  });

  it('keep the core from reaching into the page, the tests or the command line', async () => {
    expect(
      (await messages("import { x } from '../../components/spanwright-app.js';\nexport const y = x;\n", 'src/eval/probe.ts')).join('\n'),
    ).toMatch(/does not import the page/);
    expect((await messages("import { x } from '../cli/common.js';\nexport const y = x;\n", 'src/eval/probe.ts')).join('\n')).toMatch(
      /does not import the command line/,
    );
  });

  it('reject a floating promise', async () => {
    const code = 'async function f(): Promise<void> {}\nexport function g(): void {\n  f();\n}\n';
    expect((await messages(code, 'src/data/probe.ts')).join('\n')).toMatch(/no-floating-promises/);
  });
});
