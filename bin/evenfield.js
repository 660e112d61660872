#!/usr/bin/env node
// Thin launcher: the command lives in lib/cli (compiled to dist/ by `npm install` / `npm run build`).
// On Linux, `inspect` runs in a child process with the C allocator set for large image arrays, and with
// V8's background threads off when it runs a pool of workers (lib/cli/relaunch.ts says why); every other
// command runs here.
import { existsSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { fileURLToPath } from 'node:url';

const entry = new URL('../dist/lib/cli/main.js', import.meta.url);
const relaunch = new URL('../dist/lib/cli/relaunch.js', import.meta.url);
if (!existsSync(fileURLToPath(entry)) || !existsSync(fileURLToPath(relaunch))) {
  process.stderr.write('evenfield: not built yet: run "npm install" (or "npm run build") in the project folder\n');
  // 3: evenfield itself could not run (README, "Exit status"); 2 would read as a lot with an unusable photo
  process.exit(3);
}
const { relaunchEnv, relaunchNodeOptions, runInChild, followLauncher } = await import(relaunch.href);
const extraEnv = relaunchEnv(process.argv.slice(2), process.env, process.platform, process.execArgv);
if (extraEnv) {
  const nodeOptions = relaunchNodeOptions(process.argv.slice(2), availableParallelism());
  process.exitCode = await runInChild(fileURLToPath(import.meta.url), extraEnv, nodeOptions);
} else {
  await followLauncher();
  const { run } = await import(entry.href);
  await run();
}
