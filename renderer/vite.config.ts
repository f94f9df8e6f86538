/**
 * Renderer build: Svelte 5 app from renderer/ to dist/renderer (served by the web host and
 * loaded by the Electron window). The output has no inline script and no eval, so the page runs
 * under a strict Content-Security-Policy (script-src 'self').
 */
import { svelte } from '@sveltejs/vite-plugin-svelte';
import { defineConfig } from 'vite';
import { fileURLToPath } from 'node:url';

const here = fileURLToPath(new URL('.', import.meta.url));

export default defineConfig({
  root: here,
  base: './',
  plugins: [svelte({ configFile: fileURLToPath(new URL('./svelte.config.js', import.meta.url)) })],
  build: {
    outDir: fileURLToPath(new URL('../dist/renderer', import.meta.url)),
    emptyOutDir: true,
    target: 'es2022',
    // No inline module-preload polyfill script: the page's CSP allows only script files from 'self'.
    modulePreload: { polyfill: false },
    // Inline assets would be data: URLs; keep every asset a file.
    assetsInlineLimit: 0,
    sourcemap: false,
    chunkSizeWarningLimit: 2000,
    // Timing notes of the bundler are noise in the test output.
    rolldownOptions: { checks: { pluginTimings: false } },
  },
  server: { host: '127.0.0.1' },
});
