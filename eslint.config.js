// The rules the tools check (npm run lint): typescript-eslint on every TypeScript file,
// no promise left floating, and the layering of DEVELOPERS.md — the core (src/, but the
// Node layers src/node and src/cli) uses no Node API and imports neither Node layer; the
// Node adapters (src/node) do not import the command line; the recipe (tiny-models/) may
// use src/node but not src/cli; the page (components/) never loads tfjs or tensor code;
// and nothing in src/ reaches into the page, the worker, the tests or the recipe. Each
// rule covers `import(…)` expressions as well as import declarations.
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

const outsideSrc = ['**/components/**', '**/workers/**', '**/tests/**', '**/tiny-models/**'];

// no-restricted-imports checks import declarations only: the same patterns for dynamic
// `import('…')` of a literal path, as no-restricted-syntax selectors. A glob becomes a
// regular expression (a leading `**/` any folders, `*` one name, `**` anything); slashes
// are written \x2F because a selector's /regex/ ends at its first slash.
function dynamicImports(rules) {
  const glob = (g) =>
    g
      .split('**/')
      .map((part) =>
        part
          .replace(/[.+?^${}()|[\]\\]/g, '\\$&')
          .split('**')
          .map((piece) => piece.replace(/\*/g, '[^/]*'))
          .join('.*'),
      )
      .join('(?:.*/)?')
      .replace(/\//g, '\\x2F');
  return rules.map(({ group, message }) => ({
    selector: `ImportExpression[source.value=/^(?:${group.map(glob).join('|')})$/]`,
    message,
  }));
}

/** Both rules for one layer: import declarations and import(…) expressions. */
function layerRules(patterns) {
  return {
    'no-restricted-imports': ['error', { patterns }],
    'no-restricted-syntax': ['error', ...dynamicImports(patterns)],
  };
}

const CORE = [
  {
    group: nodeBuiltins,
    message: 'src/ is isomorphic: Node APIs belong in src/node/ or src/cli/ (DEVELOPERS.md, "Rules that bind every change")',
  },
  { group: outsideSrc, message: 'the core does not import the page, the worker, the tests or the recipe' },
  { group: ['**/cli/**'], message: 'the core does not import the command line' },
  { group: ['**/node/**'], message: 'the core does not import the Node layer (src/node/): it runs in the browser too' },
];

const NODE_LAYER = [
  { group: outsideSrc, message: 'src/node/ does not import the page, the worker, the tests or the recipe' },
  { group: ['**/cli/**'], message: 'src/node/ is below the command line: it does not import src/cli/' },
];

const RECIPE = [{ group: ['**/src/cli/**'], message: 'the recipe does not import the command line: take what it needs from src/node/' }];

const PAGE = [
  {
    group: ['@tensorflow/*'],
    message: 'the page never loads tfjs: all tensor work runs in the engine worker (workers/engine-worker.ts)',
  },
  {
    group: ['**/src/model/**', '**/src/kernels/**', '**/src/session/reader-session*'],
    message: 'the page never runs tensor code: send a request to the engine worker',
  },
  { group: nodeBuiltins, message: 'the page runs in a browser: no Node APIs' },
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
    // the core is isomorphic: no Node API outside the Node layers
    files: ['src/**/*.ts'],
    ignores: ['src/cli/**', 'src/node/**'],
    rules: layerRules(CORE),
  },
  {
    // the Node adapters the command line and the recipe share
    files: ['src/node/**/*.ts'],
    rules: layerRules(NODE_LAYER),
  },
  {
    // the base reader's recipe: the core and the Node layer, never the command line
    files: ['tiny-models/**/*.ts'],
    rules: layerRules(RECIPE),
  },
  {
    // the page renders and asks: tensors live in the worker
    files: ['components/**/*.ts'],
    rules: layerRules(PAGE),
  },
);
