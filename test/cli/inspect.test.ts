// The command as a user runs it: exit statuses, one-line errors, the rest of the batch still measured.
import { spawnSync } from 'node:child_process';
import { copyFileSync, existsSync, mkdirSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { beforeAll, describe, expect, it } from 'vitest';
import { randomScene, renderPhoto } from '../../fixtures/generator/index.js';
import { EvenfieldError, EXIT, exitStatusOf } from '../../lib/errors.js';

const BIN = join(__dirname, '..', '..', 'bin', 'evenfield.js');

function run(args: string[], timeout?: number) {
  const r = spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8', timeout });
  return { status: r.status, stdout: r.stdout, stderr: r.stderr };
}

let dir: string;
beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'ef-cli-'));
  for (const [i, name] of ['A1_white', 'A2_white'].entries()) {
    const spec = randomScene(40 + i, { width: 800, height: 600, features: [0, 0], focal35: [85, 85], yawDeg: [-4, 4], pitchDeg: [-4, 4], fill: [0.5, 0.6] });
    const { buffer, ext } = await renderPhoto(spec);
    writeFileSync(join(dir, `${name}.${ext}`), buffer);
  }
  // a text file with a photo's name
  writeFileSync(join(dir, 'B1_white.jpg'), 'not a photo at all\n');
  // a real JPEG with nothing in it but an even gray wall: no panel to find
  const gray = await sharp({ create: { width: 800, height: 600, channels: 3, background: { r: 90, g: 90, b: 90 } } }).jpeg().toBuffer();
  writeFileSync(join(dir, 'C1_white.jpg'), gray);
});

describe('evenfield inspect', () => {
  it('names each unusable photo on one line, exits 2, and still measures the others', () => {
    const out = join(dir, 'out');
    const r = run(['inspect', dir, '--out', out, '--panel-size', '597.9x336.3', '--no-pdf', '--no-mura', '--jobs', '1', '--quiet']);
    expect(r.status).toBe(2);
    const errors = r.stderr.split('\n').filter((l) => l.startsWith('error: '));
    expect(errors).toHaveLength(2);
    expect(errors.find((l) => l.includes('B1_white.jpg'))).toMatch(/B1_white\.jpg: .*not an image/);
    expect(errors.find((l) => l.includes("C1_white.jpg"))).toMatch(/C1_white\.jpg: no bright, roughly quadrilateral region found/);
    const res = JSON.parse(readFileSync(join(out, 'results.json'), 'utf8'));
    const byPanel = Object.fromEntries(res.panels.map((p: { panel: string }) => [p.panel, p]));
    expect(byPanel.A1.photos[0].status).toBe('ok');
    expect(byPanel.A2.photos[0].status).toBe('ok');
    expect(byPanel.A1.photos[0].grid.points).toHaveLength(9);
    expect(byPanel.B1.verdict).toBe('error');
    expect(byPanel.B1.photos[0].errorCode).toBe('unreadable');
    expect(byPanel.C1.verdict).toBe('error');
    expect(byPanel.C1.photos[0].errorCode).toBe('no-panel');
    expect(existsSync(join(out, 'results.csv'))).toBe(true);
  });

  it('refuses to overwrite a previous run without --force', () => {
    const out = join(dir, 'out2');
    const args = ['inspect', join(dir, 'A1_white.jpg'), '--out', out, '--panel-size', '597.9x336.3', '--no-pdf', '--jobs', '1', '--quiet'];
    expect(run(args).status).not.toBe(2);
    const again = run(args);
    expect(again.status).toBe(2);
    expect(again.stderr.trim()).toMatch(/^evenfield: .*out2: holds a previous run: add --resume to finish it or --force to replace it$/);
    expect(run([...args, '--force']).status).not.toBe(2);
  });

  it('rejects an unknown option with one line and exit status 2', () => {
    const r = run(['inspect', dir, '--spot-size', '3']);
    expect(r.status).toBe(2);
    const lines = r.stderr.trim().split('\n');
    expect(lines).toHaveLength(1);
    expect(lines[0]).toMatch(/^evenfield: Unknown argument: spot-size/);
  });

  it('stops with one line naming an output folder it cannot make, also where mkdir never succeeds', () => {
    // Under Linux's /proc a new folder fails with "no such file" though /proc exists; Node 20's recursive
    // mkdir loops on that for ever (seen here: ten minutes at full CPU). Elsewhere /proc is missing and
    // cannot be made at the root, which must end the same way. Common practice: a command that cannot
    // write its output says so and exits, with the usage/unusable status.
    const out = '/proc/evenfield-no-such-folder/out';
    const r = run(['inspect', join(dir, 'A1_white.jpg'), '--out', out, '--panel-size', '597.9x336.3', '--jobs', '1', '--quiet'], 60_000);
    expect(r.status).toBe(2);
    const lines = r.stderr.trim().split('\n');
    expect(lines).toHaveLength(1);
    expect(lines[0]).toMatch(/^evenfield: \/proc\/evenfield-no-such-folder\/out: cannot create the folder \(.+\)$/);
  });

  it('names a damaged falloff profile once, and says what is wrong with --jobs', () => {
    // common practice: "FILE: problem" on one line, the file named once; a value that is not a number
    // called that, not "NaN"
    const bad = join(dir, 'lens.json');
    writeFileSync(bad, '{ not json');
    const r = run(['inspect', join(dir, 'A1_white.jpg'), '--out', join(dir, 'o4'), '--falloff', bad, '--quiet']);
    expect(r.status).toBe(2);
    const lines = r.stderr.trim().split('\n');
    expect(lines).toHaveLength(1);
    expect(lines[0]!.startsWith(`evenfield: ${bad}: not valid JSON: `)).toBe(true);
    const j = run(['inspect', join(dir, 'A1_white.jpg'), '--out', join(dir, 'o5'), '--jobs', 'two']);
    expect(j.status).toBe(2);
    expect(j.stderr.trim()).toBe('evenfield: --jobs must be a whole number from 1 to 64 (got something that is not a number)');
  });

  it('rejects a missing input with one line naming it', () => {
    const r = run(['inspect', join(dir, 'nope.jpg'), '--out', join(dir, 'o3')]);
    expect(r.status).toBe(2);
    expect(r.stderr.trim()).toMatch(/nope\.jpg: no such file or folder$/);
  });
});

// Exit statuses as the README's "Exit status" table gives them: 2 is a problem with the input or the command
// line, 3 that evenfield itself could not run, so that a script (the demo's among them) never reads a
// broken run as a lot with an unusable photo in it. Common practice: distinct statuses for bad input and
// for a tool's own failure.
describe('evenfield could not run', () => {
  it('a launcher without its compiled command says how to build it, on one line, and exits 3', () => {
    const root = mkdtempSync(join(tmpdir(), 'ef-unbuilt-'));
    mkdirSync(join(root, 'bin'));
    copyFileSync(BIN, join(root, 'bin', 'evenfield.js'));
    const r = spawnSync(process.execPath, [join(root, 'bin', 'evenfield.js'), 'inspect', dir], { encoding: 'utf8' });
    expect(r.status).toBe(EXIT.failed);
    expect(EXIT.failed).toBe(3);
    const lines = r.stderr.trim().split('\n');
    expect(lines).toHaveLength(1);
    expect(lines[0]).toMatch(/^evenfield: not built yet: run "npm install"/);
  });

  it('a problem with the input or options is 2, a fault of evenfield\'s own is 3', () => {
    expect(exitStatusOf(new EvenfieldError('criteria', 'line 3: unknown key', 'c.yaml'))).toBe(2);
    expect(exitStatusOf(new EvenfieldError('usage', 'choose one of --linear and --response'))).toBe(2);
    expect(exitStatusOf(new EvenfieldError('internal', 'report: 2 artifact entries for 3 photos'))).toBe(3);
    expect(exitStatusOf(new TypeError("Cannot read properties of undefined (reading 'w')"))).toBe(3);
    expect(exitStatusOf('a string thrown')).toBe(3);
  });
});
