// Preloaded into a command run by the benchmark (`node --import <this file> bin/evenfield.js ...`): at
// exit, writes the whole process's resource use (every thread: the worker pool and libvips included)
// to stderr as one line, `evenfield-bench-usage {json}`.
//   maxRssKb      peak resident set size, kilobytes (getrusage ru_maxrss)
//   userMs, systemMs  CPU time of all threads, milliseconds

process.on('exit', () => {
  const u = process.resourceUsage();
  const rec = { maxRssKb: u.maxRSS, userMs: u.userCPUTime / 1000, systemMs: u.systemCPUTime / 1000 };
  process.stderr.write(`evenfield-bench-usage ${JSON.stringify(rec)}\n`);
});

export {};
