// The effective criteria in plain sentences, one per setting or limit, for reports.

import { PATTERNS } from './schema.js';
import type { Criteria, LimitKey } from './schema.js';

function n(x: number): string {
  return String(Number(x.toPrecision(12)));
}

/** One plain-English line per setting and limit of the criteria, in a stable order. */
export function criteriaSummaryLines(c: Criteria): string[] {
  const lines: string[] = [];
  const g = c.grid;
  const where = g.placement === 'cells' ? 'at the centres of equal cells' : `inset ${n(g.insetPct)} % from the edges`;
  lines.push(`grid: ${g.layout} points ${where}, spot radius ${n(g.spotRadiusPct)} % of the diagonal`);
  if (c.panel) lines.push(`panel: active area ${n(c.panel.widthMm)} × ${n(c.panel.heightMm)} mm`);
  else lines.push('panel: size not given (blob areas and SEMU rest on an assumed size unless given on the command line)');
  lines.push(
    `mura: features from ${n(c.mura.minFeatureMm)} mm across` +
      (c.mura.tileGrid ? `; tiled wall of ${c.mura.tileGrid[0]} × ${c.mura.tileGrid[1]} modules` : ''),
  );

  for (const pattern of PATTERNS) {
    const s = c.patterns[pattern];
    if (!s) continue;
    const head = s.required ? `${pattern} (required)` : pattern;
    const ro = (k: LimitKey) => (s.reportOnly.includes(k) ? ' (report only)' : '');
    const before = lines.length;
    if (s.minOverMaxPctMin !== undefined) lines.push(`${head}: uniformity (Lmin/Lmax) at least ${n(s.minOverMaxPctMin)} %${ro('minOverMaxPctMin')}`);
    if (s.maxOverMinMax !== undefined) lines.push(`${head}: max/min ratio at most ${n(s.maxOverMinMax)}${ro('maxOverMinMax')}`);
    if (s.maxDeviationFromCentrePctMax !== undefined) {
      lines.push(`${head}: every point within ±${n(s.maxDeviationFromCentrePctMax)} % of the centre${ro('maxDeviationFromCentrePctMax')}`);
    }
    if (s.maxDuvFromCentreMax !== undefined) lines.push(`${head}: Δu'v' from the centre at most ${n(s.maxDuvFromCentreMax)}${ro('maxDuvFromCentreMax')}`);
    if (s.maxDuvAnyPairMax !== undefined) lines.push(`${head}: Δu'v' between any two points at most ${n(s.maxDuvAnyPairMax)}${ro('maxDuvAnyPairMax')}`);
    if (s.maxSemu !== undefined) lines.push(`${head}: largest mura at most ${n(s.maxSemu)} SEMU${ro('maxSemu')}`);
    if (s.blobs) {
      const from = s.blobs.countFromSemu > 0 ? ` of ${n(s.blobs.countFromSemu)} SEMU or more` : '';
      for (const [kind, limit] of Object.entries(s.blobs.maxCount)) {
        if (limit === undefined) continue;
        const what = kind === 'any' ? 'blobs of any kind' : `${kind} blobs`;
        lines.push(`${head}: ${what}${from}: at most ${limit}${ro('blobs')}`);
      }
    }
    if ('glow' in s && s.glow) {
      const gl = s.glow;
      if (gl.maxContrastPct !== undefined) lines.push(`${head}: border glow contrast at most ${n(gl.maxContrastPct)} %${ro('glow.maxContrastPct')}`);
      if (gl.maxSemu !== undefined) lines.push(`${head}: border glow at most ${n(gl.maxSemu)} SEMU${ro('glow.maxSemu')}`);
      if (gl.maxAreaMm2 !== undefined) lines.push(`${head}: border glow area at most ${n(gl.maxAreaMm2)} mm²${ro('glow.maxAreaMm2')}`);
    }
    if (s.luminanceCdM2) {
      const w = s.luminanceCdM2;
      const at = w.at === 'centre' ? 'centre luminance' : 'luminance at every point';
      const range =
        w.min !== undefined && w.max !== undefined
          ? `from ${n(w.min)} to ${n(w.max)} cd/m²`
          : w.min !== undefined
            ? `at least ${n(w.min)} cd/m²`
            : `at most ${n(w.max as number)} cd/m²`;
      lines.push(`${head}: ${at} ${range}, calibrated photos only${ro('luminanceCdM2')}`);
    }
    if (lines.length === before) lines.push(`${head}: photo taken, no limits`);
  }

  const u = c.uncertainty;
  const pts = (x: number) => `±${n(x)} ${x === 1 ? 'point' : 'points'}`;
  lines.push(
    `borderline within: uniformity ${pts(u.uniformityPctPoints)}, max/min ±${n(u.maxOverMin)}, ` +
      `deviation ${pts(u.deviationPctPoints)}, Δu'v' ±${n(u.duv)}, SEMU ±${n(u.semu)}, ` +
      `glow contrast ${pts(u.contrastPctPoints)}, luminance ±${n(u.luminancePct)} %`,
  );
  return lines;
}
