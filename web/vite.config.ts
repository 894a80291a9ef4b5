// Builds the dashboard into dist/web, which the daemon serves at `/`. No network at build or run time: the page
// uses system fonts and bundles everything it imports.
import { fileURLToPath } from 'node:url';
import { resolve } from 'node:path';
import { defineConfig } from 'vite';

const root = fileURLToPath(new URL('.', import.meta.url));

// For `vite --config web/vite.config.ts` during development: forward /ws to a running daemon, e.g.
// DUCTBENCH_DAEMON=http://127.0.0.1:8417, and /api too (the daemon checks the token itself; the page keeps sending it).
const daemon = process.env.DUCTBENCH_DAEMON;

export default defineConfig({
  root,
  base: './',
  publicDir: false,
  build: {
    outDir: resolve(root, '../dist/web'),
    emptyOutDir: true,
    target: 'es2022',
    // One small app: a single chunk keeps the served file list obvious.
    chunkSizeWarningLimit: 400,
  },
  server: {
    host: '127.0.0.1',
    fs: { allow: [resolve(root, '..')] },
    proxy: daemon ? { '/ws': { target: daemon, ws: true }, '/api': { target: daemon } } : undefined,
  },
});
