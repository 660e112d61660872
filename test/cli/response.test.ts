// The camera response as a user makes and uses it: `calibrate --bracket` on photos drawn through a tone
// curve other than sRGB's, then `inspect --response`, checked against the generator's truth; and the
// refusals of a bracket that cannot give a response.
//
// The check is against the truth of the generated panel (its grid of relative luminance along the normal);
// the tone curve is an invented one (sRGB bent into an S, 35 % steeper at mid-scale), as camera JPEG
// engines apply (common practice).
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { randomScene, renderPhoto } from '../../fixtures/generator/index.js';
import type { PhotoSpec } from '../../fixtures/generator/types.js';

const BIN = join(__dirname, '..', '..', 'bin', 'evenfield.js');
const CURVE = { contrast: 0.35 };

function run(args: string[]) {
  const r = spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8' });
  return { status: r.status, stdout: r.stdout, stderr: r.stderr };
}

let dir: string;
const bracket: string[] = [];
let truthRel: number[] = [];
let base: PhotoSpec;

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'ef-response-'));
  mkdirSync(join(dir, 'other'));
  // five photos of one white panel in a dim room, one stop apart, strong lens falloff for a spread of levels
  base = randomScene(501, { width: 1200, height: 800, features: [0, 0], yawDeg: [0, 0], pitchDeg: [0, 0] });
  base.camera.k1 = -0.35;
  base.output = { toneCurve: CURVE };
  const g0 = (await renderPhoto(base)).truth.exposure.gain as number;
  for (let k = -4; k <= 0; k++) {
    const { buffer, ext } = await renderPhoto({ ...base, exposure: { gain: g0 * 2 ** k } });
    const f = join(dir, `bracket-${k + 4}.${ext}`);
    writeFileSync(f, buffer);
    bracket.push(f);
  }
  // a white panel losing 30 % towards one corner, no lens falloff, through the same curve
  const spec = randomScene(2024, { width: 1600, height: 1000, features: [0, 0], k1: [0, 0], cornerLoss: [0.3, 0.3], yawDeg: [-5, 5], pitchDeg: [-5, 5] });
  spec.camera.cos4 = false;
  spec.output = { toneCurve: CURVE };
  const { buffer, ext, truth } = await renderPhoto(spec);
  writeFileSync(join(dir, `Q1_white.${ext}`), buffer);
  const tg = (truth.grids as unknown as { layout: number; placement: string; points: { relative: number }[] }[]).find((g) => g.layout === 9 && g.placement === 'cells')!;
  truthRel = tg.points.map((p) => p.relative);
}, 60_000);

function gridErrors(out: string): number[] {
  const res = JSON.parse(readFileSync(join(out, 'results.json'), 'utf8'));
  const ph = res.panels[0].photos[0];
  expect(ph.status).toBe('ok');
  return ph.grid.points.map((p: { relative: number }, k: number) => Math.abs(p.relative / truthRel[k]! - 1));
}

describe('calibrate --bracket and inspect --response', () => {
  it('measures the response and brings the grid to the truth where the sRGB reading is off', () => {
    const profile = join(dir, 'response.json');
    const c = run(['calibrate', '--bracket', ...bracket, '--out', profile]);
    expect(c.status).toBe(0);
    expect(c.stderr).toMatch(/response measured between codes \d+ and \d+ from \d+ points; fit [\d.]+ % rms/);
    expect(c.stderr).toMatch(/largest difference from the sRGB curve there: \+\d+/);
    const file = JSON.parse(readFileSync(profile, 'utf8'));
    expect(file.linear).toHaveLength(256);
    expect(file.photos).toHaveLength(5);

    const common = [join(dir, 'Q1_white.jpg'), '--panel-size', '597.9x336.3', '--no-pdf', '--no-mura', '--jobs', '1', '--quiet', '--force', '--date', '2026-12-04T00:00:00Z'];
    const plain = run(['inspect', ...common, '--out', join(dir, 'plain')]);
    // (the panel's verdict is "error" without the mura analysis its criteria ask for; the photo is measured)
    expect(plain.stderr).toBe('');
    const measured = run(['inspect', ...common, '--out', join(dir, 'measured'), '--response', profile]);
    expect(measured.stderr).toBe('');
    const e0 = Math.max(...gridErrors(join(dir, 'plain')));
    const e1 = Math.max(...gridErrors(join(dir, 'measured')));
    // read as sRGB, the corner points are a few % off; through the measured response a few tenths
    // measured here: 2.5 % and 0.27 %
    expect(e0).toBeGreaterThan(0.02);
    expect(e1).toBeLessThan(0.006);
    const res = JSON.parse(readFileSync(join(dir, 'measured', 'results.json'), 'utf8'));
    expect(res.panels[0].photos[0].decode.transfer).toBe('response');
    expect(res.options.transfer).toMatchObject({ kind: 'response', source: profile });
    expect(res.panels[0].photos[0].warnings.join(' ')).not.toMatch(/response was measured on/);
  });

  it('says when a photo comes from another camera than the response', async () => {
    const spec = randomScene(2025, { width: 1200, height: 800, features: [0, 0], k1: [0, 0] });
    spec.camera.model = 'FG-9 (synthetic)';
    spec.output = { toneCurve: CURVE };
    writeFileSync(join(dir, 'other', 'R1_white.jpg'), (await renderPhoto(spec)).buffer);
    const r = run(['inspect', join(dir, 'other'), '--out', join(dir, 'other-out'), '--response', join(dir, 'response.json'), '--no-pdf', '--no-mura', '--jobs', '1', '--quiet']);
    expect(r.stderr).toBe('');
    const ph = JSON.parse(readFileSync(join(dir, 'other-out', 'results.json'), 'utf8')).panels[0].photos[0];
    expect(ph.warnings.join(' ')).toMatch(/camera response was measured on Fieldglass FG-1 \(synthetic\), this photo is from Fieldglass FG-9 \(synthetic\)/);
  });

  it('says when the panel lies outside the codes the response was measured between', () => {
    // the same table, said to be measured between codes 3 and 100 only: the white panel sits higher
    const file = JSON.parse(readFileSync(join(dir, 'response.json'), 'utf8'));
    const narrow = join(dir, 'narrow.json');
    writeFileSync(narrow, JSON.stringify({ ...file, measuredCodes: [3, 100] }));
    const args = [join(dir, 'Q1_white.jpg'), '--panel-size', '597.9x336.3', '--no-pdf', '--no-mura', '--jobs', '1', '--quiet', '--force'];
    run(['inspect', ...args, '--out', join(dir, 'narrow-out'), '--response', narrow]);
    run(['inspect', ...args, '--out', join(dir, 'full-out'), '--response', join(dir, 'response.json')]);
    const warn = (out: string) => JSON.parse(readFileSync(join(dir, out, 'results.json'), 'utf8')).panels[0].photos[0].warnings.join(' ');
    expect(warn('narrow-out')).toMatch(/median code value \(\d+\) lies outside the codes the camera response was measured between \(3–100\)/);
    expect(warn('full-out')).not.toMatch(/lies outside the codes/);
  });

  it('refuses a bracket that cannot give a response, in one line each', () => {
    const out = join(dir, 'r.json');
    const one = (args: string[]) => {
      const r = run(['calibrate', '--bracket', ...args, '--out', out, '--force']);
      expect(r.status).toBe(2);
      const lines = r.stderr.trim().split('\n');
      expect(lines).toHaveLength(1);
      return lines[0]!;
    };
    expect(one(bracket.slice(0, 2))).toMatch(/at least 3 photos/);
    // three photos two stops apart overall is enough; one stop is not
    expect(one(bracket.slice(3, 5).concat(bracket[4]!))).toMatch(/span 1\.0 stops/);
    expect(one([...bracket, '--times', '1/60', '1/30'])).toMatch(/--times gives 2 exposure times for 5 photos/);
    // exposure times that are not the times used: the fit does not hold
    expect(one([...bracket, '--times', '1/100', '1/50', '1/100', '1/50', '1/25'])).toMatch(/do not fit one response|does not rise/);
    // a photo of another size
    expect(one([...bracket.slice(0, 4), join(dir, 'Q1_white.jpg')])).toMatch(/Q1_white\.jpg: photo is 1600×1000 but .* is 1200×800/);
    // a response file that is not one
    writeFileSync(join(dir, 'bad.json'), '{"format":"evenfield camera response","version":1}');
    const r = run(['inspect', join(dir, 'Q1_white.jpg'), '--out', join(dir, 'x'), '--response', join(dir, 'bad.json')]);
    expect(r.status).toBe(2);
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
    expect(r.stderr).toMatch(/bad\.json: not a valid camera response/);
  });
});
