#!/usr/bin/env node
// Thin launcher: the CLI is compiled to dist/ by `npm run build` (npm start and npm test build first).
import { existsSync } from 'node:fs';
import { fileURLToPath, pathToFileURL } from 'node:url';
const cli = fileURLToPath(new URL('../dist/server/cli.js', import.meta.url));
if (!existsSync(cli)) {
  process.stderr.write('ductbench: not built yet; run `npm run build` in the ductbench folder first\n');
  process.exit(2);
}
const { main } = await import(pathToFileURL(cli).href);
const code = await main(process.argv.slice(2));
if (code !== 0) process.exit(code);
