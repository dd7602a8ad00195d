// ESLint flat config. Correctness rules only: layout belongs to Prettier (eslint-config-prettier, last, turns
// ESLint's layout rules off). DEVELOPERS.md ("Lint and format") says why each choice was made.
import js from '@eslint/js';
import { defineConfig, globalIgnores } from 'eslint/config';
import prettier from 'eslint-config-prettier';
import vue from 'eslint-plugin-vue';
import globals from 'globals';
import tseslint from 'typescript-eslint';

export default defineConfig([
  // Build output, installed packages, test artefacts and databases are not ours to lint.
  globalIgnores(['node_modules/', 'dist/', 'coverage/', 'tests/artifacts/', '.data/', 'fonts/']),

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

  {
    rules: {
      // `==` only where it means what everyone expects (`x == null`); the tree already keeps to that.
      eqeqeq: ['error', 'smart'],
      // `_name` marks a parameter or binding kept on purpose (an Express handler's unused `req`, a skipped tuple item).
      '@typescript-eslint/no-unused-vars': [
        'error',
        { argsIgnorePattern: '^_', varsIgnorePattern: '^_', caughtErrors: 'none', ignoreRestSiblings: true },
      ],
    },
  },

  prettier,
]);
