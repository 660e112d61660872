// Camera geometry of the generator against independent computations.
import { Matrix, SingularValueDecomposition } from 'ml-matrix';
import { describe, expect, it } from 'vitest';
import { buildCamera, focalPxFrom35 } from '../../fixtures/generator/camera.js';
import { gaussianBlur } from '../../fixtures/generator/render.js';
import { renderPhotoPixels } from '../../fixtures/generator/photo.js';
import type { CameraSpec, PhotoSpec } from '../../fixtures/generator/types.js';

/** Rodrigues' formula: rotation by `angle` about a unit axis (independent of the generator's Euler code). */
function axisAngle(axis: [number, number, number], angleDeg: number): Matrix {
  const a = (angleDeg * Math.PI) / 180;
  const [x, y, z] = axis;
  const K = new Matrix([
    [0, -z, y],
    [z, 0, -x],
    [-y, x, 0],
  ]);
  return Matrix.eye(3).add(K.clone().mul(Math.sin(a))).add(K.mmul(K).mul(1 - Math.cos(a)));
}

/** Project panel mm points by explicit 3-D transform and pinhole division. */
function projectDirect(spec: CameraSpec, W: number, H: number, pts: [number, number][]): [number, number][] {
  const wpx = spec.width;
  const hpx = spec.height;
  // 35 mm equivalent: the 36 x 24 mm frame diagonal maps to the image diagonal
  const f = (spec.focal35 / Math.sqrt(36 * 36 + 24 * 24)) * Math.sqrt(wpx * wpx + hpx * hpx);
  const fill = spec.fill ?? 0.8;
  const D = f * Math.max(W / (fill * wpx), H / (fill * hpx));
  const R = axisAngle([0, 0, 1], spec.rollDeg ?? 0)
    .mmul(axisAngle([1, 0, 0], spec.pitchDeg ?? 0))
    .mmul(axisAngle([0, 1, 0], spec.yawDeg ?? 0));
  const s = spec.shift ?? [0, 0];
  const t = Matrix.columnVector([(s[0] * wpx * D) / f, (s[1] * hpx * D) / f, D]);
  return pts.map(([x, y]) => {
    const P = R.mmul(Matrix.columnVector([x - W / 2, y - H / 2, 0])).add(t);
    return [(f * P.get(0, 0)) / P.get(2, 0) + (wpx - 1) / 2, (f * P.get(1, 0)) / P.get(2, 0) + (hpx - 1) / 2];
  });
}

/** Direct linear transform from 4+ correspondences (Hartley & Zisserman, alg. 4.1), via ml-matrix SVD. */
function dlt(src: [number, number][], dst: [number, number][]): number[] {
  const rows: number[][] = [];
  src.forEach(([x, y], i) => {
    const [u, v] = dst[i];
    rows.push([-x, -y, -1, 0, 0, 0, u * x, u * y, u]);
    rows.push([0, 0, 0, -x, -y, -1, v * x, v * y, v]);
  });
  while (rows.length < 9) rows.push(new Array(9).fill(0));
  const svd = new SingularValueDecomposition(new Matrix(rows));
  const V = svd.rightSingularVectors;
  const h = V.getColumn(V.columns - 1);
  return h.map((v) => v / h[8]);
}

describe('generator camera', () => {
  it('35 mm-equivalent focal length: a 3600 x 2400 image at f35 = 50 has f = 5000 px (100 px per frame mm)', () => {
    // common practice: equivalent focal length scales with the frame diagonal (36 x 24 mm full frame)
    expect(focalPxFrom35(50, 3600, 2400)).toBeCloseTo(5000, 9);
  });

  it('square-on: the active area spans exactly fill x image width, centred on the image centre', () => {
    const cam = buildCamera({ width: 1600, height: 1200, focal35: 30, fill: 0.75 }, 597.9, 336.3);
    const tl = cam.project(0, 0);
    const br = cam.project(597.9, 336.3);
    expect(br[0] - tl[0]).toBeCloseTo(0.75 * 1600, 6);
    expect((tl[0] + br[0]) / 2).toBeCloseTo(799.5, 6);
    expect((tl[1] + br[1]) / 2).toBeCloseTo(599.5, 6);
    // aspect ratio preserved: height = width * 336.3 / 597.9
    expect(br[1] - tl[1]).toBeCloseTo((0.75 * 1600 * 336.3) / 597.9, 6);
  });

  const poses: CameraSpec[] = [
    { width: 1600, height: 1200, focal35: 28, yawDeg: 12, pitchDeg: -7, rollDeg: 3, fill: 0.7, shift: [0.03, -0.02] },
    { width: 4000, height: 3000, focal35: 35, yawDeg: -15, pitchDeg: 15, rollDeg: -5, fill: 0.6 },
    { width: 640, height: 480, focal35: 50, yawDeg: 0, pitchDeg: 9, rollDeg: 0, fill: 0.9, shift: [-0.04, 0] },
  ];

  it('truth corners equal an independent 3-D projection (Rodrigues rotations, ml-matrix)', () => {
    for (const cs of poses) {
      const W = 597.9;
      const H = 336.3;
      const spec: PhotoSpec = {
        seed: 1,
        panel: { widthMm: W, heightMm: H, pattern: 'white' },
        camera: { ...cs, width: 64, height: 48 }, // pixel work is not under test here: tiny image
        noise: null,
      };
      // the corners do not depend on pixel count except through f and the centre: use the full spec
      const cam = buildCamera(cs, W, H);
      const expected = projectDirect(cs, W, H, [
        [0, 0],
        [W, 0],
        [W, H],
        [0, H],
      ]);
      const got = [cam.project(0, 0), cam.project(W, 0), cam.project(W, H), cam.project(0, H)];
      for (let k = 0; k < 4; k++) {
        expect(got[k][0]).toBeCloseTo(expected[k][0], 6);
        expect(got[k][1]).toBeCloseTo(expected[k][1], 6);
      }
      // and the truth file of a (tiny) render carries the same geometry
      const t = renderPhotoPixels(spec).truth;
      const small = projectDirect(spec.camera, W, H, [[0, 0], [W, H]]);
      expect(t.corners[0][0]).toBeCloseTo(small[0][0], 6);
      expect(t.corners[2][1]).toBeCloseTo(small[1][1], 6);
    }
  });

  it('homography equals the DLT solution from the projected corners and maps interior points alike', () => {
    for (const cs of poses) {
      const W = 597.9;
      const H = 336.3;
      const cam = buildCamera(cs, W, H);
      const src: [number, number][] = [
        [0, 0],
        [W, 0],
        [W, H],
        [0, H],
      ];
      const h = dlt(src, projectDirect(cs, W, H, src));
      for (let k = 0; k < 9; k++) expect(cam.H[k]).toBeCloseTo(h[k], Math.abs(h[k]) > 1 ? 4 : 8);
      const inner: [number, number][] = [
        [123.4, 56.7],
        [400, 300],
        [W / 2, H / 2],
      ];
      const direct = projectDirect(cs, W, H, inner);
      inner.forEach(([x, y], i) => {
        const p = cam.project(x, y);
        expect(p[0]).toBeCloseTo(direct[i][0], 6);
        expect(p[1]).toBeCloseTo(direct[i][1], 6);
      });
    }
  });

  it('cos^4 falloff: 0.5625 at a 30 degree field angle (field notes §4, computed)', () => {
    const cam = buildCamera({ width: 3000, height: 2000, focal35: 24 }, 500, 300);
    const r = cam.focalPx * Math.tan(Math.PI / 6);
    // along a diagonal direction too: the falloff is radial about the optical centre
    expect(cam.falloff(cam.ox + r, cam.oy)).toBeCloseTo(0.5625, 12);
    expect(cam.falloff(cam.ox + r / Math.SQRT2, cam.oy - r / Math.SQRT2)).toBeCloseTo(0.5625, 12);
    // 20 degrees: 0.77973 (field notes §4)
    expect(cam.falloff(cam.ox, cam.oy + cam.focalPx * Math.tan(Math.PI / 9))).toBeCloseTo(0.77973, 5);
    expect(cam.falloff(cam.ox, cam.oy)).toBe(1);
  });

  it('extra radial polynomial multiplies cos^4 with r normalised to the half diagonal, about an offset centre', () => {
    const cam = buildCamera({ width: 1000, height: 800, focal35: 35, cos4: false, k1: -0.2, k2: 0.05, opticalCentreOffset: [0.02, -0.01] }, 500, 300);
    expect(cam.ox).toBeCloseTo(499.5 + 20, 12);
    expect(cam.oy).toBeCloseTo(399.5 - 8, 12);
    const half = Math.hypot(1000, 800) / 2;
    // at r = 1 (half diagonal away from the optical centre): 1 + k1 + k2
    expect(cam.falloff(cam.ox + half, cam.oy)).toBeCloseTo(1 - 0.2 + 0.05, 12);
    expect(cam.falloff(cam.ox, cam.oy + half / 2)).toBeCloseTo(1 - 0.2 / 4 + 0.05 / 16, 12);
  });
});

describe('viewing angle and angular emission', () => {
  it('viewing angle at the centre equals the tilt; at a corner it follows from the camera position (ml-matrix)', () => {
    const cs: CameraSpec = { width: 1600, height: 1200, focal35: 30, yawDeg: 10, pitchDeg: -6, rollDeg: 2, fill: 0.75 };
    const W = 597.9;
    const H = 336.3;
    const cam = buildCamera(cs, W, H);
    // no shift: the camera looks at the panel centre, so the angle there is the angle between axis and normal
    expect((Math.acos(cam.viewCos(W / 2, H / 2)) * 180) / Math.PI).toBeCloseTo(cam.tiltDeg, 9);
    // camera centre in panel coordinates from R and t by ml-matrix: C = -R^T t
    const R = new Matrix([cam.R.slice(0, 3), cam.R.slice(3, 6), cam.R.slice(6, 9)]);
    const C = R.transpose().mmul(Matrix.columnVector(cam.t)).mul(-1);
    const P = [0 - W / 2, H - H / 2, 0]; // bottom-left corner, panel-centred
    const v = [C.get(0, 0) - P[0], C.get(1, 0) - P[1], C.get(2, 0) - P[2]];
    const cosRef = -v[2] / Math.hypot(v[0], v[1], v[2]); // the viewer's side is -z in panel coordinates
    expect(cam.viewCos(0, H)).toBeCloseTo(cosRef, 12);
  });

  it('a panel emitting cos^p towards the camera: centre pixel = gain x cos(yaw)^p (no falloff, no noise)', () => {
    const base: PhotoSpec = {
      seed: 2,
      panel: { widthMm: 300, heightMm: 200, pattern: 'white', viewingExponent: 2 },
      camera: { width: 201, height: 151, focal35: 35, fill: 0.6, yawDeg: 20, cos4: false },
      noise: null,
      exposure: { gain: 0.5 },
    };
    const { image, truth } = renderPhotoPixels(base);
    const h = truth.homographyMmToImage;
    const w = h[6] * 150 + h[7] * 100 + h[8];
    // the centre of the panel projects to the image centre (100, 75) without shift
    expect((h[0] * 150 + h[1] * 100 + h[2]) / w).toBeCloseTo(100, 9);
    expect((h[3] * 150 + h[4] * 100 + h[5]) / w).toBeCloseTo(75, 9);
    expect(truth.camera.viewingAngleDeg.centre).toBeCloseTo(20, 9);
    expect(image.data[(75 * 201 + 100) * 3 + 1]).toBeCloseTo(0.5 * Math.cos((20 * Math.PI) / 180) ** 2, 4);
  });
});

describe('optical blur', () => {
  it('a point of light spreads as the sampled 2-D Gaussian of the given sigma', () => {
    const w = 41;
    const data = new Float32Array(w * w * 3);
    data[(20 * w + 20) * 3 + 1] = 1;
    const sigma = 1.7;
    gaussianBlur(data, w, w, sigma);
    for (const [i, j] of [
      [0, 0],
      [1, 0],
      [3, 2],
      [5, -4],
    ]) {
      // continuous Gaussian density; the sampled kernel's sum differs from sqrt(2 pi) sigma by < 1e-9 for
      // sigma >= 1, but truncation at 4 sigma (renormalised) lifts every weight by ~1e-4 relative
      const ref = Math.exp(-(i * i + j * j) / (2 * sigma * sigma)) / (2 * Math.PI * sigma * sigma);
      expect(Math.abs(data[((20 + j) * w + 20 + i) * 3 + 1] / ref - 1)).toBeLessThan(2e-4);
    }
    let sum = 0;
    for (let k = 1; k < data.length; k += 3) sum += data[k];
    expect(sum).toBeCloseTo(1, 6);
  });

  it('blur keeps the light of a rendered panel (edges away from the frame border)', () => {
    const spec: PhotoSpec = {
      seed: 3,
      panel: { widthMm: 300, heightMm: 200, pattern: 'white', bezelMm: 5 },
      camera: { width: 200, height: 150, focal35: 30, yawDeg: 7, fill: 0.6, cos4: false, blurPx: 1.5 },
      noise: null,
      surround: { ambient: 0, spill: 0 },
      exposure: { gain: 0.5 },
    };
    const blurred = renderPhotoPixels(spec).image.data;
    const sharp = renderPhotoPixels({ ...spec, camera: { ...spec.camera, blurPx: 0 } }).image.data;
    let a = 0;
    let b = 0;
    for (let k = 1; k < blurred.length; k += 3) {
      a += blurred[k];
      b += sharp[k];
    }
    expect(a / b).toBeCloseTo(1, 6);
    // and it does blur: the largest pixel-to-pixel step shrinks
    const maxStep = (d: Float32Array) => {
      let m = 0;
      for (let k = 3; k < d.length; k += 3) m = Math.max(m, Math.abs(d[k + 1] - d[k - 2]));
      return m;
    };
    expect(maxStep(blurred)).toBeLessThan(0.5 * maxStep(sharp));
  });
});
