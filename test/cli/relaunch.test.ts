// `inspect` runs in a child process with glibc's allocator settings (lib/cli/relaunch.ts). The settings
// are glibc's documented tunables read from the environment at start-up (mallopt(3): M_ARENA_MAX,
// M_MMAP_THRESHOLD; "Environment variables" there); what these tests hold is the launcher's contract:
// the child gets them, arguments, errors and exit statuses pass through unchanged, and no child outlives
// its launcher.
import { spawn, spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { ALLOCATOR_ENV, jobsOf, POOL_NODE_OPTIONS, RELAUNCHED_MARK, relaunchEnv, relaunchNodeOptions } from '../../lib/cli/relaunch.js';

const BIN = join(__dirname, '..', '..', 'bin', 'evenfield.js');

/** A preloaded module that reports the allocator setting each process of the command sees. */
const REPORT_ENV = `data:text/javascript,process.stderr.write('arena=' + process.env.MALLOC_ARENA_MAX + ' mark=' + process.env.${RELAUNCHED_MARK} + '\\n')`;
/** ...and one that also keeps the relaunched child alive after its command, to see what ends it. */
const HOLD_CHILD = `data:text/javascript,if (process.env.${RELAUNCHED_MARK}) { process.stderr.write('child ' + process.pid + '\\n'); setInterval(() => {}, 1000); }`;

/** ...and one whose child's main thread is busy for a minute from half a second on (a long analysis). */
const BUSY_CHILD = `data:text/javascript,if (process.env.${RELAUNCHED_MARK}) { process.stderr.write('child ' + process.pid + '\\n'); setTimeout(() => { process.stderr.write('busy\\n'); const end = Date.now() + 60000; while (Date.now() < end); }, 500); }`;

/** Running (a zombie, ended but not yet reaped by whoever adopted it, counts as ended). */
function alive(pid: number): boolean {
  try {
    process.kill(pid, 0);
  } catch {
    return false;
  }
  try {
    // /proc/PID/stat: "pid (name) state ..."; the name may hold spaces, the state follows its ')'
    const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
    return stat.slice(stat.lastIndexOf(')') + 2, stat.lastIndexOf(')') + 3) !== 'Z';
  } catch {
    return false;
  }
}

async function until(check: () => boolean, ms: number): Promise<boolean> {
  const end = Date.now() + ms;
  while (Date.now() < end) {
    if (check()) return true;
    await new Promise((r) => setTimeout(r, 50));
  }
  return check();
}

/** Start the launcher with a hook (HOLD_CHILD by default); resolves with it and its child's pid once the child is up. */
async function startHeld(hook = HOLD_CHILD): Promise<{ launcher: ReturnType<typeof spawn>; childPid: number }> {
  const out = mkdtempSync(join(tmpdir(), 'ef-relaunch-'));
  const launcher = spawn(process.execPath, ['--import', hook, BIN, 'inspect', join(out, 'no-such-folder'), '--out', join(out, 'o')], { stdio: ['ignore', 'ignore', 'pipe'] });
  const childPid = await new Promise<number>((resolvePid, reject) => {
    let err = '';
    launcher.stderr!.setEncoding('utf8');
    launcher.stderr!.on('data', (s: string) => {
      err += s;
      const m = /child (\d+)/.exec(err);
      if (m) resolvePid(Number(m[1]));
    });
    launcher.on('exit', () => reject(new Error(`launcher ended before its child started: ${err}`)));
  });
  return { launcher, childPid };
}

describe('relaunch decision', () => {
  const linux = 'linux' as NodeJS.Platform;
  it('relaunches inspect on Linux with both allocator settings and the mark', () => {
    expect(relaunchEnv(['inspect', 'photos', '--jobs', '2'], {}, linux)).toEqual({ MALLOC_ARENA_MAX: '2', MALLOC_MMAP_THRESHOLD_: '1048576', [RELAUNCHED_MARK]: '1' });
    expect(relaunchEnv(['--quiet', 'inspect', 'photos'], {}, linux)).not.toBeNull();
  });
  it('runs everything else in the launcher itself', () => {
    // other commands, other systems, a child already relaunched, a user's own allocator settings, the
    // opt-out, a debugger
    expect(relaunchEnv(['calibrate', 'flats'], {}, linux)).toBeNull();
    expect(relaunchEnv(['--help'], {}, linux)).toBeNull();
    expect(relaunchEnv(['inspect', 'photos'], {}, 'darwin')).toBeNull();
    expect(relaunchEnv(['inspect', 'photos'], {}, 'win32')).toBeNull();
    expect(relaunchEnv(['inspect', 'photos'], { [RELAUNCHED_MARK]: '1' }, linux)).toBeNull();
    expect(relaunchEnv(['inspect', 'photos'], { MALLOC_ARENA_MAX: '4' }, linux)).toBeNull();
    expect(relaunchEnv(['inspect', 'photos'], { MALLOC_MMAP_THRESHOLD_: '65536' }, linux)).toBeNull();
    expect(relaunchEnv(['inspect', 'photos'], { EVENFIELD_ALLOCATOR: 'default' }, linux)).toBeNull();
    expect(relaunchEnv(['inspect', 'photos'], {}, linux, ['--inspect-brk'])).toBeNull();
    expect(relaunchEnv(['inspect', 'photos'], { NODE_OPTIONS: '--inspect=9230' }, linux)).toBeNull();
    expect(relaunchEnv(['inspect', 'photos'], {}, linux, ['--import', 'hook.js'])).not.toBeNull();
  });
  it("gives a pool's child V8's switch for no background threads, and a single job's child none", () => {
    // `node --v8-options`: "--single-threaded (disable the use of background tasks)"
    expect(POOL_NODE_OPTIONS).toEqual(['--single-threaded']);
    expect(relaunchNodeOptions(['inspect', 'photos', '--jobs', '2'], 1)).toEqual(['--single-threaded']);
    expect(relaunchNodeOptions(['inspect', 'photos', '--jobs=4'], 2)).toEqual(['--single-threaded']);
    expect(relaunchNodeOptions(['inspect', 'photos', '--jobs', '1'], 2)).toEqual([]);
    // without --jobs the command uses one worker per core
    expect(relaunchNodeOptions(['inspect', 'photos'], 2)).toEqual(['--single-threaded']);
    expect(relaunchNodeOptions(['inspect', 'photos'], 1)).toEqual([]);
    // a value that is no number is the command's to report, with V8's defaults
    expect(jobsOf(['inspect', 'photos', '--jobs', 'many'], 2)).toBeNaN();
    expect(relaunchNodeOptions(['inspect', 'photos', '--jobs', 'many'], 2)).toEqual([]);
  });
  it('sets the values glibc documents for these variables (arena count, threshold in bytes)', () => {
    expect(Number(ALLOCATOR_ENV.MALLOC_ARENA_MAX)).toBe(2);
    expect(Number(ALLOCATOR_ENV.MALLOC_MMAP_THRESHOLD_)).toBe(1 << 20);
  });
});

describe.runIf(process.platform === 'linux')('relaunched inspect (Linux)', () => {
  it('runs the command in a child with the allocator set; its one-line error and exit status pass through', () => {
    const out = mkdtempSync(join(tmpdir(), 'ef-relaunch-'));
    const r = spawnSync(process.execPath, ['--import', REPORT_ENV, BIN, 'inspect', join(out, 'missing.jpg'), '--out', join(out, 'o')], { encoding: 'utf8' });
    const lines = r.stderr.trim().split('\n');
    // the launcher (no setting) and then the child (setting and mark)
    expect(lines.filter((l) => l.startsWith('arena='))).toEqual(['arena=undefined mark=undefined', 'arena=2 mark=1']);
    const errors = lines.filter((l) => l.startsWith('evenfield:'));
    expect(errors).toHaveLength(1);
    expect(errors[0]).toContain('missing.jpg');
    expect(r.status).toBe(2);
  });

  it("starts a pool's child with V8's background threads off and a single job's child with V8's defaults", () => {
    const hook = `data:text/javascript,process.stderr.write('single=' + process.execArgv.includes('--single-threaded') + ' mark=' + process.env.${RELAUNCHED_MARK} + '\\n')`;
    for (const [jobs, expected] of [
      ['2', 'single=true mark=1'],
      ['1', 'single=false mark=1'],
    ]) {
      const out = mkdtempSync(join(tmpdir(), 'ef-relaunch-'));
      const r = spawnSync(process.execPath, ['--import', hook, BIN, 'inspect', join(out, 'missing.jpg'), '--out', join(out, 'o'), '--jobs', jobs], { encoding: 'utf8' });
      const lines = r.stderr.split('\n').filter((l) => l.startsWith('single='));
      expect(lines).toEqual(['single=false mark=undefined', expected]);
      expect(r.status).toBe(2);
    }
  });

  it('leaves the command in the launcher when the user set the allocator', () => {
    const out = mkdtempSync(join(tmpdir(), 'ef-relaunch-'));
    const r = spawnSync(process.execPath, ['--import', REPORT_ENV, BIN, 'inspect', join(out, 'missing.jpg'), '--out', join(out, 'o')], {
      encoding: 'utf8',
      env: { ...process.env, MALLOC_ARENA_MAX: '3' },
    });
    expect(r.stderr.split('\n').filter((l) => l.startsWith('arena='))).toEqual(['arena=3 mark=undefined']);
    expect(r.status).toBe(2);
  });

  it('stops the child when the launcher is killed outright (kill -9)', async () => {
    const { launcher, childPid } = await startHeld();
    expect(alive(childPid)).toBe(true);
    launcher.kill('SIGKILL');
    // the child's IPC channel closes with the launcher; allow a loaded machine a few seconds
    expect(await until(() => !alive(childPid), 10_000)).toBe(true);
  }, 30_000);

  it('stops the child when the launcher is killed while its main thread is busy, without waiting for it to be free', async () => {
    const { launcher, childPid } = await startHeld(BUSY_CHILD);
    // let the busy loop start: the channel's 'disconnect' cannot be heard until it ends
    await new Promise((r) => setTimeout(r, 1500));
    const t0 = Date.now();
    launcher.kill('SIGKILL');
    expect(await until(() => !alive(childPid), 10_000)).toBe(true);
    // the watch looks every 200 ms; a loaded machine may take longer to schedule it, never the minute
    expect(Date.now() - t0).toBeLessThan(10_000);
  }, 30_000);

  it('passes a termination signal on to the child and ends by it', async () => {
    const { launcher, childPid } = await startHeld();
    const ended = new Promise<{ code: number | null; signal: NodeJS.Signals | null }>((r) => launcher.on('exit', (code, signal) => r({ code, signal })));
    launcher.kill('SIGTERM');
    expect(await ended).toEqual({ code: null, signal: 'SIGTERM' });
    expect(await until(() => !alive(childPid), 10_000)).toBe(true);
  }, 30_000);
});
