import js from '@eslint/js';
import tseslint from 'typescript-eslint';

export default tseslint.config(
  { ignores: ['dist/**', 'node_modules/**', 'coverage/**', '.cache/**', 'replay-logs/**', 'bench/out/**'] },
  js.configs.recommended,
  ...tseslint.configs.recommended,
  {
    languageOptions: {
      globals: {
        process: 'readonly', console: 'readonly', Buffer: 'readonly', URL: 'readonly',
        setTimeout: 'readonly', clearTimeout: 'readonly', setInterval: 'readonly', clearInterval: 'readonly',
      },
    },
    rules: {
      '@typescript-eslint/no-unused-vars': ['error', { argsIgnorePattern: '^_', varsIgnorePattern: '^_' }],
    },
  },
  {
    // The pure core does no I/O (docs/principles.md): no node:* imports, no wall clock.
    files: ['src/matching/**/*.ts', 'src/window/**/*.ts'],
    rules: {
      'no-restricted-imports': ['error', { patterns: ['node:*', 'kafkajs', 'fs', 'path', 'os'] }],
      'no-restricted-properties': ['error', { object: 'Date', property: 'now', message: 'time is an input: inject a clock' }],
    },
  },
);
