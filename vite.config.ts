/**
 * Build of the browser dashboard (dashboard/ → dist/dashboard). Everything is bundled: the page loads
 * nothing from any origin but the server that serves it. `npm run build` runs `tsc` for the service and
 * then this build; `npm run dev:dashboard` serves the sources with a proxy to a running `plumbline serve`.
 */
import { fileURLToPath } from 'node:url';
import { defineConfig } from 'vite';

const root = fileURLToPath(new URL('./dashboard/', import.meta.url));
const outDir = fileURLToPath(new URL('./dist/dashboard/', import.meta.url));
/** Where `npm run dev:dashboard` sends /api and /watch (a running `plumbline serve`). */
const target = process.env.PLUMBLINE_URL ?? 'http://127.0.0.1:7340';

export default defineConfig({
  root,
  base: './',
  publicDir: false,
  build: {
    outDir,
    emptyOutDir: true,
    target: 'es2022',
    sourcemap: true,
    // echarts is one large module; the warning would only repeat that.
    chunkSizeWarningLimit: 1500,
    modulePreload: { polyfill: false },
  },
  server: {
    proxy: {
      '/api': target,
      '/watch': { target: target.replace(/^http/, 'ws'), ws: true },
    },
  },
});
