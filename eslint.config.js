// ESLint flat config. Correctness rules only: layout belongs to Prettier (eslint-config-prettier, last, turns
// ESLint's layout rules off). DEVELOPERS.md ("Lint and format") says why each choice was made.
import comments from '@eslint-community/eslint-plugin-eslint-comments/configs';
import js from '@eslint/js';
import { defineConfig, globalIgnores } from 'eslint/config';
import prettier from 'eslint-config-prettier';
import vue from 'eslint-plugin-vue';
import globals from 'globals';
import tseslint from 'typescript-eslint';

export default defineConfig([
  // Build output, installed packages, test artefacts and databases are not ours to lint.
  globalIgnores(['node_modules/', 'dist/', 'coverage/', 'tests/artifacts/', '.data/', 'fonts/']),

  // A directive that no longer silences anything is an error, so stale exceptions do not pile up.
  { linterOptions: { reportUnusedDisableDirectives: 'error' } },

  js.configs.recommended,
  // The syntax-only preset: the type-checked presets need a full TypeScript program per run (DEVELOPERS.md).
  tseslint.configs.recommended,
  vue.configs['flat/recommended'],
  {
    files: ['**/*.vue'],
    languageOptions: { parserOptions: { parser: tseslint.parser } },
    rules: {
      // vue-tsc already reports an undefined name in a component; ESLint's copy of that check does not know TS types.
      'no-undef': 'off',
    },
  },

  // Where each part of the tree runs.
  { files: ['client/**'], languageOptions: { globals: globals.browser } },
  { files: ['server/**', 'tests/**', 'shared/**', '*.js', '*.ts'], languageOptions: { globals: globals.node } },

  // Every eslint-disable comment names its rule and says why after `--`; none switches everything off for a file.
  comments.recommended,
  { rules: { '@eslint-community/eslint-comments/require-description': ['error', { ignore: ['eslint-enable'] }] } },

  {
    rules: {
      // `==` only where it means what everyone expects (`x == null`); the tree already keeps to that.
      eqeqeq: ['error', 'smart'],
      // `_next` keeps Express's four-argument error-handler signature; `{ a: _a, ...rest }` drops a field from a copy.
      '@typescript-eslint/no-unused-vars': ['error', { argsIgnorePattern: '^_', ignoreRestSiblings: true }],
    },
  },

  prettier,
]);
