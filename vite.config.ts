import { defineConfig } from 'vitest/config';
import vue from '@vitejs/plugin-vue';

// One config for the client build, the dev middleware and the tests.
export default defineConfig({
  plugins: [vue()],
  build: {
    outDir: 'dist/client',
    emptyOutDir: true,
    chunkSizeWarningLimit: 1500,
    // A slow shared machine makes the timing warning fire on every build; it says nothing about the app.
    rolldownOptions: { checks: { bundlerTimings: false } },
  },
  test: {
    include: ['tests/**/*.test.ts'],
    environment: 'node',
    testTimeout: 30_000,
    hookTimeout: 120_000,
    globalSetup: ['tests/global-setup.ts'],
  },
});
