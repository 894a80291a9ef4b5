#!/usr/bin/env node
// Thin launcher: the CLI is compiled to dist/ by `npm run build` (run by `npm install` via prepare, and by npm start).
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
const cli = fileURLToPath(new URL('../dist/server/cli.js', import.meta.url));
if (!existsSync(cli)) {
  process.stderr.write('ductbench: not built yet; run `npm run build` in the ductbench folder first\n');
  process.exit(2);
}
await import(cli);
