#!/usr/bin/env node
// Thin launcher: the command lives in lib/cli (compiled to dist/ by `npm install` / `npm run build`).
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

const entry = new URL('../dist/lib/cli/main.js', import.meta.url);
if (!existsSync(fileURLToPath(entry))) {
  process.stderr.write('evenfield: not built yet: run "npm install" (or "npm run build") in the project folder\n');
  process.exit(2);
}
const { run } = await import(entry.href);
await run();
