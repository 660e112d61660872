// Report identifiers: a SHA-256 over everything a report is drawn from except the date it was
// generated, so the same inputs always carry the same id and any change in them changes it.

import { createHash } from 'node:crypto';

/** JSON with object keys sorted at every level; typed arrays are written as hashes of their bytes. */
export function canonicalJson(value: unknown): string {
  return JSON.stringify(normalise(value));
}

function normalise(v: unknown): unknown {
  if (v === null || typeof v !== 'object') {
    if (typeof v === 'number' && !Number.isFinite(v)) return String(v);
    return v;
  }
  if (ArrayBuffer.isView(v)) {
    const bytes = new Uint8Array(v.buffer, v.byteOffset, v.byteLength);
    return { bytesSha256: createHash('sha256').update(bytes).digest('hex'), length: bytes.length };
  }
  if (v instanceof Date) return v.toISOString();
  if (Array.isArray(v)) return v.map(normalise);
  const out: Record<string, unknown> = {};
  for (const k of Object.keys(v as Record<string, unknown>).sort()) {
    const x = (v as Record<string, unknown>)[k];
    if (x !== undefined) out[k] = normalise(x);
  }
  return out;
}

export function sha256Hex(text: string): string {
  return createHash('sha256').update(text, 'utf8').digest('hex');
}

export function reportId(parts: Record<string, unknown>): string {
  return sha256Hex(canonicalJson(parts));
}
