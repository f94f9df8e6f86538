import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['tests/**/*.test.ts', 'engine/**/*.test.ts', 'main/**/*.test.ts'],
    exclude: ['**/*.browser.test.ts', 'node_modules/**', 'dist/**'],
    testTimeout: 60_000,
    pool: 'forks',
  },
});
