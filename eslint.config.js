// The rules the tools check (npm run lint): typescript-eslint on every TypeScript file,
// no promise left floating, and the layering of DEVELOPERS.md — the core (src/, but
// src/cli) uses no Node API, the page (components/) never loads tfjs or tensor code, and
// nothing in src/ reaches into the page, the worker, the tests or the recipe.
import js from '@eslint/js';
import tseslint from 'typescript-eslint';

const nodeBuiltins = [
  'node:*',
  'fs',
  'fs/*',
  'path',
  'os',
  'child_process',
  'crypto',
  'http',
  'https',
  'url',
  'util',
  'worker_threads',
  'module',
  'stream',
  'zlib',
  'net',
];

export default tseslint.config(
  { ignores: ['dist/**', 'node_modules/**', 'runs/**', 'tests/bench/.scratch/**', 'src/kernels/wasm-binary.ts', 'tests/e2e/artifacts/**'] },
  js.configs.recommended,
  ...tseslint.configs.recommended,
  {
    files: ['**/*.ts'],
    languageOptions: {
      parserOptions: {
        projectService: { allowDefaultProject: ['vite.config.ts', 'vitest.config.ts'] },
        tsconfigRootDir: import.meta.dirname,
      },
    },
    rules: {
      '@typescript-eslint/no-floating-promises': 'error',
      '@typescript-eslint/no-misused-promises': ['error', { checksVoidReturn: { attributes: false } }],
      '@typescript-eslint/no-unused-vars': [
        'error',
        { argsIgnorePattern: '^_', varsIgnorePattern: '^_', destructuredArrayIgnorePattern: '^_' },
      ],
      '@typescript-eslint/no-non-null-assertion': 'off',
      'no-constant-condition': ['error', { checkLoops: false }],
    },
  },
  {
    // the core is isomorphic: no Node API outside src/cli
    files: ['src/**/*.ts'],
    ignores: ['src/cli/**'],
    rules: {
      'no-restricted-imports': [
        'error',
        {
          patterns: [
            {
              group: nodeBuiltins,
              message: 'src/ is isomorphic: Node APIs belong in src/cli/ (DEVELOPERS.md, "Rules that bind every change")',
            },
            {
              group: ['**/components/**', '**/workers/**', '**/tests/**', '**/tiny-models/**'],
              message: 'the core does not import the page, the worker, the tests or the recipe',
            },
            { group: ['**/cli/**'], message: 'the core does not import the command line' },
          ],
        },
      ],
    },
  },
  {
    // the page renders and asks: tensors live in the worker
    files: ['components/**/*.ts'],
    rules: {
      'no-restricted-imports': [
        'error',
        {
          patterns: [
            {
              group: ['@tensorflow/*'],
              message: 'the page never loads tfjs: all tensor work runs in the engine worker (workers/engine-worker.ts)',
            },
            {
              group: ['**/src/model/**', '**/src/kernels/**', '**/src/session/reader-session*'],
              message: 'the page never runs tensor code: send a request to the engine worker',
            },
            { group: nodeBuiltins, message: 'the page runs in a browser: no Node APIs' },
          ],
        },
      ],
    },
  },
);
