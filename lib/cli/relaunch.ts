// The lot command in a child process with the C allocator set for this workload.
//
// A photo allocates and frees tens of typed arrays of 1-50 MB. With glibc's defaults the allocator
// keeps freed blocks in one arena per thread and raises its mmap threshold after the first large
// frees, so the resident memory of a lot run stays far above what is live (`npm run bench`, 200 photos of
// 12 MP, --jobs 2: 704 MB peak with the defaults, 594 MB this way; README "Speed"). glibc reads these
// settings from the environment only when a process starts, so `evenfield inspect` starts its work in a
// child process of the same Node with them set, and waits for it. Nothing else changes: same
// arguments, same standard streams, same exit status; only a run with a pool of workers also gets V8
// options of its own (POOL_NODE_OPTIONS below).
//
// Not done when the user has set either variable (their choice stands), when EVENFIELD_ALLOCATOR=default,
// under a debugger (--inspect), or off Linux (other C libraries ignore these variables). The child stops
// when the launcher goes away, also when it is killed outright (kill -9): its IPC channel to the launcher
// closes, and a watch thread sees it adopted by another parent.
// This module must stay light: it runs before the command's own modules are loaded.

import { spawn } from 'node:child_process';
import { EXIT } from '../errors.js';

/** The allocator settings the child gets (glibc mallopt names: M_ARENA_MAX, M_MMAP_THRESHOLD). */
export const ALLOCATOR_ENV: Readonly<Record<string, string>> = {
  MALLOC_ARENA_MAX: '2',
  // 1 MiB: arrays of a megabyte or more are mapped on their own and go back to the system when freed
  MALLOC_MMAP_THRESHOLD_: '1048576',
};

/**
 * V8 options of the child when it runs a pool of workers (--jobs 2 or more; the default is one per core).
 * Each worker is its own V8 instance, and by default each also compiles optimised code and collects
 * garbage on background threads. With one worker per core those threads take cores from the workers
 * (a 12 MP lot of 18 photos, --jobs 2 on 2 cores, no PDFs: 92-94 s of CPU and 47-48 s without this,
 * 76-78 s and 40 s with it; DEVELOPERS.md "Study log", Speed). --single-threaded is V8's own switch for that: the
 * same work on the thread that needs it. A run with one job keeps V8's defaults (there the background
 * threads have the second core to themselves: 66 s instead of 69 s).
 */
export const POOL_NODE_OPTIONS: readonly string[] = ['--single-threaded'];

/**
 * The worker count the command will use: the value of --jobs (as `--jobs N` or `--jobs=N`), or one
 * per core when it is not given; NaN for a value that is not a number (the command itself reports it).
 */
export function jobsOf(args: readonly string[], cores: number): number {
  let jobs = cores;
  for (let k = 0; k < args.length; k++) {
    const a = args[k]!;
    if (a === '--jobs') jobs = Number(args[k + 1]);
    else if (a.startsWith('--jobs=')) jobs = Number(a.slice('--jobs='.length));
  }
  return jobs;
}

/** The Node options the relaunched child gets besides the launcher's own: POOL_NODE_OPTIONS for a pool. */
export function relaunchNodeOptions(args: readonly string[], cores: number): string[] {
  return jobsOf(args, cores) >= 2 ? [...POOL_NODE_OPTIONS] : [];
}

/** Set in the child's environment: it is the relaunched command. */
export const RELAUNCHED_MARK = 'EVENFIELD_RELAUNCHED';

/** The command word: the first argument that is not an option. */
function commandOf(args: readonly string[]): string | null {
  return args.find((a) => !a.startsWith('-')) ?? null;
}

/**
 * The environment additions for relaunching this command line, or null to run it in this process.
 * `args` are the command's arguments (process.argv without node and the script), `nodeOptions` Node's own
 * (process.execArgv).
 */
export function relaunchEnv(
  args: readonly string[],
  env: NodeJS.ProcessEnv,
  platform: NodeJS.Platform,
  nodeOptions: readonly string[] = [],
): Record<string, string> | null {
  if (platform !== 'linux') return null;
  // under a debugger the command stays where the debugger is attached
  if (nodeOptions.some((o) => o.startsWith('--inspect')) || (env.NODE_OPTIONS ?? '').includes('--inspect')) return null;
  if (env[RELAUNCHED_MARK]) return null;
  if (env.EVENFIELD_ALLOCATOR === 'default') return null;
  if (Object.keys(ALLOCATOR_ENV).some((k) => env[k] !== undefined)) return null;
  if (commandOf(args) !== 'inspect') return null;
  return { ...ALLOCATOR_ENV, [RELAUNCHED_MARK]: '1' };
}

const FORWARDED_SIGNALS: NodeJS.Signals[] = ['SIGINT', 'SIGTERM', 'SIGHUP'];

/**
 * Run `script` with this process's Node options (and `extraNodeOptions`) and arguments in a child process
 * with `extraEnv` added;
 * settle with the child's exit status (a child ended by a signal is re-raised here).
 */
export function runInChild(script: string, extraEnv: Record<string, string>, extraNodeOptions: readonly string[] = []): Promise<number> {
  return new Promise((resolveRun) => {
    const child = spawn(process.execPath, [...process.execArgv, ...extraNodeOptions, script, ...process.argv.slice(2)], {
      stdio: ['inherit', 'inherit', 'inherit', 'ipc'],
      env: { ...process.env, ...extraEnv },
    });
    // a signal for the launcher is meant for the command (a terminal's Ctrl-C reaches both anyway)
    const forward = (sig: NodeJS.Signals) => () => child.kill(sig);
    const handlers = FORWARDED_SIGNALS.map((sig) => [sig, forward(sig)] as const);
    for (const [sig, h] of handlers) process.on(sig, h);
    child.on('error', (e) => {
      process.stderr.write(`evenfield: cannot start the command's process: ${e.message}\n`);
      resolveRun(EXIT.failed);
    });
    child.on('exit', (code, signal) => {
      for (const [sig, h] of handlers) process.off(sig, h);
      if (signal) {
        process.kill(process.pid, signal);
        return;
      }
      resolveRun(code ?? EXIT.failed);
    });
  });
}

/**
 * A watch on the launcher from its own thread: the command's main thread can be busy for seconds (a
 * photo's analysis with --jobs 1), too long for a run killed with its launcher to go on writing into the
 * output folder, where a `--resume` may already be working. When the launcher is gone (this process has
 * been adopted: its parent id changed) the whole process is killed at once, as the launcher was; the
 * atomic writes leave nothing half-written and the next run removes the temporary files of dead runs.
 */
const WATCH_SOURCE = `
const { workerData } = require('node:worker_threads');
setInterval(() => {
  if (process.ppid !== workerData.launcher) process.kill(process.pid, 'SIGKILL');
}, workerData.everyMs);
`;

/** How often the watch looks at the parent id, ms. */
const WATCH_EVERY_MS = 200;

/** In the relaunched child: stop when the launcher is gone. */
export async function followLauncher(): Promise<void> {
  if (!process.env[RELAUNCHED_MARK]) return;
  const stop = () => {
    process.stderr.write('evenfield: the launching process ended: stopping\n');
    process.exit(2);
  };
  // The launcher may be gone already: if it ended while this process was starting, the channel was
  // closed (and its 'disconnect' emitted) before any handler was there to hear of it.
  if (!process.channel || !process.connected) stop();
  // the channel must not keep this process alive once the command is done
  process.channel!.unref();
  process.on('disconnect', stop);
  const { Worker } = await import('node:worker_threads');
  const watch = new Worker(WATCH_SOURCE, {
    eval: true,
    workerData: { launcher: process.ppid, everyMs: WATCH_EVERY_MS },
    // a few lines polling a number: a small heap (the thread costs about 10 MB of the command's memory)
    resourceLimits: { maxOldGenerationSizeMb: 16, maxYoungGenerationSizeMb: 2 },
  });
  // the watch is a safeguard: if it cannot run, the IPC channel's 'disconnect' above still stops the command
  watch.on('error', () => {});
  watch.unref();
}
