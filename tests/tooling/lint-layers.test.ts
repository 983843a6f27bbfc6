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
  it('keep Node APIs out of the core, and let the Node layer and the command line have them', async () => {
    const code = "import { readFileSync } from 'node:fs';\nexport const x = readFileSync;\n";
    expect((await messages(code, 'src/data/probe.ts')).join('\n')).toMatch(/no-restricted-imports: .*src\/ is isomorphic/);
    expect(await messages(code, 'src/node/probe.ts')).toEqual([]);
    expect(await messages(code, 'src/cli/probe.ts')).toEqual([]);
    // an import(…) expression too
    const dynamic = "export async function f(): Promise<unknown> {\n  return import('node:fs');\n}\n";
    expect((await messages(dynamic, 'src/data/probe.ts')).join('\n')).toMatch(/no-restricted-syntax: .*src\/ is isomorphic/);
  });

  it('keep the core from importing the Node layer, and the Node layer from importing the command line', async () => {
    const store = "import { FsCheckpointStore } from '../node/fs-store.js';\nexport const x = FsCheckpointStore;\n";
    expect((await messages(store, 'src/train/probe.ts')).join('\n')).toMatch(/does not import the Node layer/);
    const cli = "import { printJson } from '../cli/common.js';\nexport const x = printJson;\n";
    expect((await messages(cli, 'src/node/probe.ts')).join('\n')).toMatch(/src\/node\/ is below the command line/);
    expect(await messages("import { UserError } from './user-error.js';\nexport const x = UserError;\n", 'src/node/probe.ts')).toEqual([]);
  });

  it('let the recipe use the Node layer but not the command line', async () => {
    const recipe = 'tiny-models/recipe/probe.ts';
    const node = "import { FsCheckpointStore } from '../../src/node/fs-store.js';\nexport const x = FsCheckpointStore;\n";
    expect(await messages(node, recipe)).toEqual([]);
    const cli = "import { printJson } from '../../src/cli/common.js';\nexport const x = printJson;\n";
    expect((await messages(cli, recipe)).join('\n')).toMatch(/no-restricted-imports: .*the recipe does not import the command line/);
    const dynamic = "export async function f(): Promise<unknown> {\n  return import('../../src/cli/commands/job.js');\n}\n";
    expect((await messages(dynamic, recipe)).join('\n')).toMatch(/no-restricted-syntax: the recipe does not import the command line/);
    const dynamicNode = "export async function f(): Promise<unknown> {\n  return import('../../src/node/job-folder.js');\n}\n";
    expect(await messages(dynamicNode, recipe)).toEqual([]);
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
