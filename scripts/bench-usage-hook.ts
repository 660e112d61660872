// Preloaded into a command run by the benchmark (`node --import <this file> bin/evenfield.js ...`): at
// exit, writes the whole process's resource use (every thread: the worker pool and libvips included)
// to stderr as one line, `evenfield-bench-usage {json}`.
//   maxRssKb      peak resident set size, kilobytes: on Linux the kernel's high-water mark of this
//                 program's memory (VmHWM in /proc/self/status), elsewhere getrusage's ru_maxrss
//   rusageMaxRssKb  getrusage's ru_maxrss, for the record
//   userMs, systemMs  CPU time of all threads, milliseconds
// Why not ru_maxrss on Linux: a process started by fork and exec keeps as its ru_maxrss the resident size
// of the forked copy of its parent, so a command started by a benchmark holding 600 MB reports at
// least 600 MB however little it uses itself. VmHWM belongs to the program's own memory map, made new
// by exec.
// The launcher passes its Node options to the child that runs `inspect` (lib/cli/relaunch.ts), so the
// child loads this hook too and both write a line; the benchmark adds them up.

import { readFileSync } from 'node:fs';

function highWaterKb(): number | null {
  try {
    const m = /^VmHWM:\s*(\d+)\s*kB/m.exec(readFileSync('/proc/self/status', 'utf8'));
    return m ? Number(m[1]) : null;
  } catch {
    return null;
  }
}

process.on('exit', () => {
  const u = process.resourceUsage();
  const rec = { maxRssKb: highWaterKb() ?? u.maxRSS, rusageMaxRssKb: u.maxRSS, userMs: u.userCPUTime / 1000, systemMs: u.systemCPUTime / 1000 };
  process.stderr.write(`evenfield-bench-usage ${JSON.stringify(rec)}\n`);
});
