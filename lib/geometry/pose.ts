// Pose of a rectangle seen under perspective, from its four image corners and a known focal length.
//
// With camera matrix K = [[f, 0, cx], [0, f, cy], [0, 0, 1]] and the homography H from panel
// coordinates (u, v in 0..1) to the image, K^-1 H = λ [W r1, Hgt r2, t], where r1, r2 are the panel's
// unit axes in camera coordinates, W and Hgt its width and height and t the position of its top-left
// corner (the planar-target relation used in camera calibration, e.g. Zhang 2000, and in Hartley &
// Zisserman ch. 8). Hence aspect = |m1| / |m2| and the normal is r1 x r2. Camera coordinates: x right,
// y down, z along the optical axis.

import { EvenfieldError } from '../errors.js';
import type { Corners } from '../types.js';
import { panelToCamera } from './homography.js';

export interface PanelPose {
  /** angle between the panel normal and the camera's optical axis, degrees */
  tiltDeg: number;
  /** angle between the panel normal and the line of sight to the panel centre, degrees */
  viewAngleCentreDeg: number;
  /** largest angle between the panel normal and the line of sight to any point of the panel (a corner), degrees */
  viewAngleMaxDeg: number;
  /** active-area width / height */
  aspect: number;
  /**
   * how far the recovered panel axes are from perpendicular, degrees. For a true rectangle this is ~0;
   * several degrees mean a wrong focal length or principal point, bad corners, or lens distortion.
   */
  orthogonalityErrorDeg: number;
  /** distance from the camera to the panel centre, in panel widths */
  distanceOverWidth: number;
  /** rotation about the panel's vertical axis (positive: right edge farther from the camera), degrees */
  yawDeg: number;
  /** rotation about the panel's horizontal axis (positive: bottom edge farther from the camera), degrees */
  pitchDeg: number;
  /** unit panel normal in camera coordinates, pointing from the panel toward the camera */
  normal: [number, number, number];
}

type V3 = [number, number, number];
const norm = (a: V3) => Math.hypot(a[0], a[1], a[2]);
const dot = (a: V3, b: V3) => a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
const cross = (a: V3, b: V3): V3 => [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]];
const deg = (r: number) => (r * 180) / Math.PI;

/**
 * Tilt, viewing angles and aspect ratio of the panel from its corners (camera pixels), the focal length
 * in the same pixels and the principal point (cx, cy), usually the image centre ((width-1)/2, (height-1)/2).
 */
export function estimatePose(corners: Corners, focalPx: number, cx: number, cy: number): PanelPose {
  if (!(focalPx > 0) || !Number.isFinite(focalPx)) {
    throw new EvenfieldError('internal', `estimatePose: focal length must be positive, got ${focalPx}`);
  }
  const H = panelToCamera(corners);
  const col = (c: number): V3 => [(H[c] - cx * H[6 + c]) / focalPx, (H[3 + c] - cy * H[6 + c]) / focalPx, H[6 + c]];
  let m1 = col(0);
  let m2 = col(1);
  let m3 = col(2);
  // Choose the sign of λ that puts the panel in front of the camera.
  const centre: V3 = [0, 1, 2].map((k) => 0.5 * m1[k] + 0.5 * m2[k] + m3[k]) as V3;
  if (centre[2] < 0) {
    m1 = m1.map((x) => -x) as V3;
    m2 = m2.map((x) => -x) as V3;
    m3 = m3.map((x) => -x) as V3;
    for (let k = 0; k < 3; k++) centre[k] = -centre[k];
  }
  const n1 = norm(m1);
  const n2 = norm(m2);
  const r1 = m1.map((x) => x / n1) as V3;
  const r2 = m2.map((x) => x / n2) as V3;
  const away = cross(r1, r2);
  const na = norm(away);
  if (!(na > 0)) throw new EvenfieldError('internal', 'estimatePose: degenerate corners');
  // r1 x r2 points away from the camera for a panel facing it; flip to point toward the camera.
  const normal = away.map((x) => -x / na) as V3;
  const tiltDeg = deg(Math.acos(Math.min(1, Math.abs(normal[2]))));
  const viewAngle = (p: V3) => deg(Math.acos(Math.min(1, Math.abs(dot(normal, p)) / norm(p))));
  const pts: V3[] = [
    m3,
    [m1[0] + m3[0], m1[1] + m3[1], m1[2] + m3[2]],
    [m1[0] + m2[0] + m3[0], m1[1] + m2[1] + m3[1], m1[2] + m2[2] + m3[2]],
    [m2[0] + m3[0], m2[1] + m3[1], m2[2] + m3[2]],
  ];
  const viewAngleCentreDeg = viewAngle(centre);
  let viewAngleMaxDeg = viewAngleCentreDeg;
  for (const p of pts) viewAngleMaxDeg = Math.max(viewAngleMaxDeg, viewAngle(p));
  const orthogonalityErrorDeg = Math.abs(90 - deg(Math.acos(Math.max(-1, Math.min(1, dot(r1, r2))))));
  // normal toward the camera is (0, 0, -1) when facing it squarely
  const yawDeg = deg(Math.atan2(normal[0], -normal[2]));
  const pitchDeg = deg(Math.atan2(normal[1], -normal[2]));
  return {
    tiltDeg,
    viewAngleCentreDeg,
    viewAngleMaxDeg,
    aspect: n1 / n2,
    orthogonalityErrorDeg,
    distanceOverWidth: norm(centre) / n1,
    yawDeg,
    pitchDeg,
    normal,
  };
}
