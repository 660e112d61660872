// Compile lib/ to dist/ once before the suites: the command-line tests and the worker pool run the
// compiled code, and must run the code under test, not an older build. Type errors do not stop the
// suites here (tsc still emits); `npm run typecheck` and the install step's build report them.
// Also: the suites' scratch folders (os.tmpdir() in the tests and in the commands they start) go into
// one folder made for this run, removed when the run ends, so a run leaves nothing behind in /tmp.
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

export default function setup(): () => void {
  // set before the test processes start, which inherit it (os.tmpdir() reads TMPDIR on POSIX systems)
  const scratch = mkdtempSync(join(tmpdir(), 'evenfield-tests-'));
  process.env.TMPDIR = scratch;
  const root = join(dirname(fileURLToPath(import.meta.url)), '..');
  try {
    execFileSync(process.execPath, [join(root, 'node_modules', 'typescript', 'bin', 'tsc'), '-p', join(root, 'tsconfig.build.json')], {
      stdio: 'pipe',
      cwd: root,
    });
  } catch (e) {
    const out = String((e as { stdout?: Buffer }).stdout ?? '');
    process.stderr.write(`warning: tsc reported errors while building dist/:\n${out.split('\n').slice(0, 10).join('\n')}\n`);
  }
  return () => rmSync(scratch, { recursive: true, force: true });
}
